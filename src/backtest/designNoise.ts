/**
 * The noise a configuration is designed to make on healthy components, before any data: incidents per 100
 * component-years per rule family, from the configuration alone, and with a fleet size the load per tier-0 responder.
 *
 * - `ewma`, `cusum`: each chart raises on average one false signal per in-control run length (ARL0, from the run-length
 *   integral equations of analysis/arl, upper side, as the detectors are designed), so a component with m charts of a
 *   detector raises m · samplesPerYear / ARL0 a year;
 * - `sampling`: the fall side of two-sided charts the same way, with its own limits (a fall opens a sampling incident);
 *   the other sampling checks depend on the data, so this part is a floor of the family's noise;
 * - `population`: the comparison with peers takes its share of the budget (population.peers.budgetShare of
 *   detection.budget); with population.opensIncidents a single result above the band's caution level opens one too,
 *   which under a normal spread happens to 1 − Φ(sigma.caution) of healthy results (or 1 − percentile.caution / 100),
 *   per measurand and sample: an upper bound, as findings of one sample share an incident;
 * - `limit`, `rate`, `condition`, `cleanliness`: set by the site's levels and the data, not derivable from the
 *   configuration: null here, measured by `wearshift backtest` on a history.
 * The total adds the families that can be derived; incidents of one component merge, so it is an upper bound.
 */
import { cusumArl } from '../analysis/arl/cusumArl.ts';
import { ewmaArl } from '../analysis/arl/ewmaArl.ts';
import { normalCdf } from '../analysis/arl/normal.ts';
import { changeDesign, type DetectorDesign } from '../analysis/budget.ts';
import { populationMeasurands } from '../analysis/populationStats.ts';
import type { Config } from '../domain/config.ts';
import { RULE_FAMILIES, SEVERITIES, type RuleFamily } from '../domain/finding.ts';
import { resolveSettings, type ComponentSettings } from '../domain/settings.ts';
import { ACCEPTABLE_PER_DAY } from '../incidents/alarmBenchmarks.ts';
import { tierZeroResponders } from '../incidents/responders.ts';

const DAYS_PER_YEAR = 365.25;

export interface FamilyNoise {
  /** Expected false-alarm incidents per 100 component-years; null when the configuration alone cannot tell. */
  readonly per100ComponentYears: number | null;
  readonly basis: string;
}

export interface DesignNoise {
  readonly group: string;
  readonly samplesPerYear: number;
  /** The false-alarm budget as a rate: 100 · alarms / years. */
  readonly budgetPer100ComponentYears: number;
  readonly byFamily: Readonly<Record<RuleFamily, FamilyNoise>>;
  /** Sum of the families that can be derived (an upper bound: incidents of one component merge). */
  readonly per100ComponentYears: number;
  readonly fleet: FleetNoise | null;
}

export interface FleetNoise {
  readonly components: number;
  readonly incidentsPerDay: number;
  readonly incidentsPerWeek: number;
  /** Tier-0 targets of the escalation policies that match the group's machine incidents (any severity). */
  readonly responders: readonly string[];
  /** Per responder: each hears of every incident of these components. */
  readonly perResponderPerDay: number;
  readonly perResponderPerWeek: number;
  /** ISA-18.2's ~150 per operator per day (from memory), for scale. */
  readonly acceptablePerDay: number;
}

export function designNoise(config: Config, options: { readonly group?: string; readonly components?: number } = {}): DesignNoise {
  const settings = resolveSettings(config, { unit: '(design)', component: options.group ?? '(design)', ...(options.group !== undefined && { group: options.group }) });
  const d = settings.detection;
  const samplesPerYear = d.budget.hoursPerYear / d.budget.sampleIntervalHours;
  const per100 = (perComponentYear: number) => round(100 * perComponentYear, 4);
  const design = changeDesign(d, settings.population);
  const m = d.measurands.length;
  const byFamily = Object.fromEntries(RULE_FAMILIES.map((f) => [f, { per100ComponentYears: null, basis: 'set by the site\u2019s levels and the data: run wearshift backtest on a history' }])) as Record<RuleFamily, FamilyNoise>;
  // One side of one detector's m charts: each raises samplesPerYear / ARL0 false signals a year.
  const chartNoise = (detector: 'ewma' | 'cusum', limits: DetectorDesign): { perYear: number; basis: string } => {
    const arl0 =
      detector === 'ewma'
        ? ewmaArl({ lambda: d.ewma.lambda, L: limits.ewmaL, shift: 0, sided: 'one', exactLimits: true })
        : cusumArl({ k: d.cusum.k, h: limits.cusumH, shift: 0, sided: 'one', headstart: d.cusum.headstart });
    const limit = detector === 'ewma' ? `L = ${round(limits.ewmaL, 4)}` : `h = ${round(limits.cusumH, 4)}`;
    return { perYear: (m * samplesPerYear) / arl0, basis: `${m} chart(s), ARL0 ${round(arl0, 1)} samples (${limit})` };
  };
  const enabled = (['ewma', 'cusum'] as const).filter((detector) => d[detector].enabled && m > 0);
  for (const detector of ['ewma', 'cusum'] as const) {
    if (!enabled.includes(detector)) {
      byFamily[detector] = { per100ComponentYears: 0, basis: 'off' };
      continue;
    }
    const n = chartNoise(detector, design.rise);
    byFamily[detector] = { per100ComponentYears: per100(n.perYear), basis: `${n.basis}, ${round(samplesPerYear, 3)} samples a year` };
  }
  if (design.fall !== undefined && enabled.length > 0) {
    const fall = enabled.map((detector) => ({ detector, ...chartNoise(detector, design.fall!) }));
    byFamily.sampling = {
      per100ComponentYears: per100(fall.reduce((sum, f) => sum + f.perYear, 0)),
      basis:
        `at least: the fall side of the charts (${fall.map((f) => `${f.detector === 'ewma' ? 'EWMA' : 'CUSUM'} ${f.basis}`).join('; ')}), ${round(samplesPerYear, 3)} samples a year; ` +
        'the other sampling checks depend on the data: run wearshift backtest on a history',
    };
  }
  byFamily.population = populationNoise(settings, samplesPerYear);
  const per100ComponentYears = round(
    RULE_FAMILIES.reduce((s, f) => s + (byFamily[f].per100ComponentYears ?? 0), 0),
    4,
  );
  return {
    group: settings.group,
    samplesPerYear: round(samplesPerYear, 4),
    budgetPer100ComponentYears: round((100 * d.budget.alarms) / d.budget.years, 4),
    byFamily,
    per100ComponentYears,
    fleet: options.components === undefined ? null : fleetNoise(config, settings.group, per100ComponentYears, options.components),
  };
}

function populationNoise(settings: ComponentSettings, samplesPerYear: number): FamilyNoise {
  const p = settings.population;
  const parts: string[] = [];
  let perYear = 0;
  if (p.peers.enabled) {
    perYear += (p.peers.budgetShare * settings.detection.budget.alarms) / settings.detection.budget.years;
    parts.push(`comparison with peers: ${p.peers.budgetShare} of the budget, shared by the watched metals (an upper bound)`);
  }
  if (p.opensIncidents) {
    const tail = p.method === 'sigma' ? 1 - normalCdf(p.sigma.caution) : 1 - p.percentile.caution / 100;
    const measurands = populationMeasurands(p).length;
    perYear += measurands * samplesPerYear * tail;
    parts.push(`single results: ${measurands} measurands × ${round(samplesPerYear, 3)} samples × ${round(tail, 4)} above the caution level (upper bound)`);
  }
  return { per100ComponentYears: round(100 * perYear, 4), basis: parts.length === 0 ? 'advisory only' : parts.join('; ') };
}

function fleetNoise(config: Config, group: string, per100: number, components: number): FleetNoise {
  const map = tierZeroResponders(config.escalation.policies);
  const responders = [...new Set(SEVERITIES.flatMap((s) => map.of({ id: '', key: '', unit: '', component: '', group, kind: 'machine', peakSeverity: s, timeline: [] })))].sort();
  const perDay = (per100 / 100) * (components / DAYS_PER_YEAR);
  return {
    components,
    incidentsPerDay: round(perDay, 6),
    incidentsPerWeek: round(perDay * 7, 6),
    responders,
    perResponderPerDay: responders.length === 0 ? 0 : round(perDay, 6),
    perResponderPerWeek: responders.length === 0 ? 0 : round(perDay * 7, 6),
    acceptablePerDay: ACCEPTABLE_PER_DAY,
  };
}

function round(x: number, digits: number): number {
  const f = 10 ** digits;
  return Math.round(x * f) / f;
}
