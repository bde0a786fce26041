/**
 * The levels a measurand's forecast looks for: the fixed caution and alarm levels of its group, the population
 * alarm level of the oil-hours band it will be in, and the oil-condition levels of rules/condition.ts (TBN at a
 * fraction of new, TAN over new, viscosity either way from new, water, fuel, soot, oxidation, nitration). The same
 * levels the rules judge readings with, so a forecast crossing is the finding that would follow.
 */
import type { GroupStats } from '../model.ts';
import { MEASURAND_NAMES, MEASURANDS, type Measurand } from '../../domain/measurands.ts';
import type { ComponentSettings } from '../../domain/settings.ts';
import { populationMeasurands } from '../populationStats.ts';
import { populationAlarmAt } from '../rules/population.ts';
import { formatNumber, quantity } from '../rules/ruleInput.ts';
import type { LimitSource } from './model.ts';

export interface LimitSpec {
  readonly source: LimitSource;
  readonly severity: 'caution' | 'alarm';
  readonly side: 'above' | 'below';
  /** The level at a point in oil hours on the charge; undefined where there is none. */
  readonly levelAt: (oilHours: number) => number | undefined;
  /** Where the level comes from, for the sentence: "fixed limit", "half of the new-oil 10 mg KOH/g". */
  readonly note: string;
}

const CONDITION_MEASURANDS: readonly Measurand[] = ['tbn', 'tan', 'v40', 'v100', 'water', 'fuel', 'soot', 'oxidation', 'nitration'];

/** Every measurand that may have a level to forecast (population levels need the group's statistics as well). */
export function forecastMeasurands(settings: ComponentSettings): Measurand[] {
  const out = new Set<Measurand>();
  for (const m of Object.keys(settings.limits) as Measurand[]) if (settings.limits[m] !== undefined) out.add(m);
  for (const m of populationMeasurands(settings.population)) out.add(m);
  for (const m of CONDITION_MEASURANDS) if (conditionSpecs(m, settings).length > 0) out.add(m);
  return MEASURAND_NAMES.filter((m) => out.has(m) && MEASURANDS[m].unit !== 'code');
}

export function limitSpecs(m: Measurand, settings: ComponentSettings, group: GroupStats | undefined): LimitSpec[] {
  const specs: LimitSpec[] = [];
  const fixed = settings.limits[m];
  for (const severity of ['alarm', 'caution'] as const) {
    const level = fixed?.[severity];
    if (level !== undefined) specs.push({ source: 'fixed', severity, side: 'above', levelAt: () => level, note: `fixed limit of group ${settings.group}` });
  }
  if (populationMeasurands(settings.population).includes(m) && group?.bands[m] !== undefined) {
    const input = { settings, group };
    specs.push({ source: 'population', severity: 'alarm', side: 'above', levelAt: (h) => populationAlarmAt(input, m, h), note: 'group limit of its oil-hours band' });
  }
  specs.push(...conditionSpecs(m, settings));
  return specs;
}

/** The oil-condition levels of rules/condition.ts for a measurand, as the forecast looks for them (none without their new-oil reference where they need one). */
export function conditionSpecs(m: Measurand, settings: ComponentSettings): LimitSpec[] {
  const c = settings.condition;
  const fresh = settings.newOil[m];
  const at = (severity: 'caution' | 'alarm', side: 'above' | 'below', level: number, note: string): LimitSpec => ({ source: 'condition', severity, side, levelAt: () => level, note });
  switch (m) {
    case 'tbn': {
      if (fresh === undefined || !(fresh > 0)) return [];
      const f = c.tbnFallFraction;
      return [
        at('alarm', 'below', fresh * f, `${formatNumber(f)} of the new-oil ${quantity(m, fresh)}`),
        at('caution', 'below', (fresh * (1 + f)) / 2, `${formatNumber((1 + f) / 2)} of the new-oil ${quantity(m, fresh)}`),
      ];
    }
    case 'tan':
      if (fresh === undefined) return [];
      return (['alarm', 'caution'] as const).map((s) => at(s, 'above', fresh + c.tanRise[s], `new oil ${quantity(m, fresh)} plus ${quantity(m, c.tanRise[s])}`));
    case 'v40':
    case 'v100': {
      if (fresh === undefined || !(fresh > 0)) return [];
      const p = c.viscosityChangePercent;
      return (['alarm', 'caution'] as const).flatMap((s) => [
        at(s, 'above', fresh * (1 + p[s] / 100), `${formatNumber(p[s])} % above the new-oil ${quantity(m, fresh)}`),
        at(s, 'below', fresh * (1 - p[s] / 100), `${formatNumber(p[s])} % below the new-oil ${quantity(m, fresh)}`),
      ]);
    }
    case 'water':
    case 'fuel':
    case 'soot':
    case 'oxidation':
    case 'nitration': {
      const shift = m === 'oxidation' || m === 'nitration' ? (fresh ?? 0) : 0;
      return (['alarm', 'caution'] as const).flatMap((s) => {
        const level = c[m][s];
        return level === undefined ? [] : [at(s, 'above', level + shift, 'oil-condition level')];
      });
    }
    default:
      return [];
  }
}

/** The level make-up oil brings: clean oil carries no wear metal or contaminant; an oil property, its new-oil value (unknown: none). */
export function makeUpLevel(m: Measurand, settings: ComponentSettings): number | undefined {
  const kind = MEASURANDS[m].kind;
  if (kind === 'wear' || kind === 'contaminant') return settings.newOil[m] ?? 0;
  return settings.newOil[m];
}
