/**
 * Evaluates one component's whole history: every rule family over every sample, grouped into one step per
 * sample. Pure and deterministic: the same samples (in any order, with any duplicates) give the same steps,
 * so the live worker, `wearshift replay` and the benchmarks agree.
 */
import type { Sample } from '../domain/event.ts';
import { findingKey, type Finding } from '../domain/finding.ts';
import type { Measurand } from '../domain/measurands.ts';
import type { ComponentSettings } from '../domain/settings.ts';
import { buildHistory } from './history.ts';
import { wearIntervals } from './intervals.ts';
import type { Evaluation, GroupStats, Interval, Step } from './model.ts';
import { changeFindings } from './rules/change.ts';
import { cleanlinessFindings } from './rules/cleanliness.ts';
import { conditionFindings } from './rules/condition.ts';
import { limitFindings } from './rules/limit.ts';
import { populationFindings } from './rules/population.ts';
import { rateFindings } from './rules/rate.ts';
import type { RuleInput } from './rules/ruleInput.ts';

export function evaluateComponent(samples: Iterable<Sample>, settings: ComponentSettings, group?: GroupStats): Evaluation {
  const history = buildHistory(samples);
  const cache = new Map<Measurand, readonly Interval[]>();
  const intervals = (m: Measurand): readonly Interval[] => {
    const known = cache.get(m);
    if (known !== undefined) return known;
    const list = wearIntervals(history, m, settings);
    cache.set(m, list);
    return list;
  };
  const input: RuleInput = { history, settings, intervals, ...(group !== undefined && { group }) };
  const change = changeFindings(input);
  const all = [
    ...limitFindings(input),
    ...rateFindings(input),
    ...populationFindings(input),
    ...conditionFindings(input),
    ...cleanlinessFindings(input),
    ...change.findings,
  ];
  const bySample = new Map<string, Finding[]>();
  for (const f of all) {
    const list = bySample.get(f.sampleId);
    if (list === undefined) bySample.set(f.sampleId, [f]);
    else list.push(f);
  }
  const steps: Step[] = history.samples.map((s) => ({
    sampleId: s.sampleId,
    sampledAt: s.sampledAt,
    findings: (bySample.get(s.sampleId) ?? []).sort(byKey),
  }));
  return { history, steps, baselines: change.baselines };
}

function byKey(a: Finding, b: Finding): number {
  const ka = findingKey(a);
  const kb = findingKey(b);
  return ka < kb ? -1 : ka > kb ? 1 : 0;
}
