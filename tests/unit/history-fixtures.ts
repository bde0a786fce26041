/** Builders shared by the series, interval and rule tests: samples go through the real event validation. */
import { parseConfig } from '../../src/domain/configFile.ts';
import { parseResultEvent, type ResultEvent, type Sample } from '../../src/domain/event.ts';
import type { Measurand } from '../../src/domain/measurands.ts';
import { resolveSettings, type ComponentSettings } from '../../src/domain/settings.ts';
import { buildHistory } from '../../src/analysis/history.ts';
import { wearIntervals } from '../../src/analysis/intervals.ts';
import type { GroupStats, Interval } from '../../src/analysis/model.ts';
import type { RuleInput } from '../../src/analysis/rules/ruleInput.ts';

const DAY = 86_400_000;
const START = Date.UTC(2026, 0, 1, 8);

/** One validated sample; `day` counts from 1 January 2026. */
export function sample(day: number, event: Partial<ResultEvent> & Pick<ResultEvent, 'readings'>): Sample {
  const parsed = parseResultEvent({
    sampleId: `S-${String(day).padStart(4, '0')}`,
    unit: 'PS2-P3',
    component: 'gearbox',
    sampledAt: new Date(START + day * DAY).toISOString(),
    ...event,
  });
  if (!parsed.ok) throw new Error(`fixture is not a valid event: ${JSON.stringify(parsed.issues)}`);
  return parsed.sample;
}

/** Settings of group `group` resolved from a YAML configuration, as the worker would. */
export function settingsFrom(yaml: string, group = 'pump-gearboxes'): ComponentSettings {
  return resolveSettings(parseConfig(yaml), { unit: 'PS2-P3', component: 'gearbox', group });
}

export function ruleInput(samples: Iterable<Sample>, settings: ComponentSettings, group?: GroupStats): RuleInput {
  const history = buildHistory(samples);
  const cache = new Map<Measurand, Interval[]>();
  const intervals = (m: Measurand) => {
    if (!cache.has(m)) cache.set(m, wearIntervals(history, m, settings));
    return cache.get(m)!;
  };
  return { history, settings, intervals, ...(group && { group }) };
}
