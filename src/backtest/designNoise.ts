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
 * The total adds the families that can be derived and nothing else: it leaves out the families above and the sampling
 * checks other than the fall side, so it is neither the configuration's whole noise nor a bound on it.
 *
 * With a fleet size, the load is split by family, severity and incident kind (a rise of EWMA or CUSUM is a `watch`
 * machine incident, a fall a `watch` sampling incident, the comparison with peers a `caution`, a single result above
 * the population levels a `caution` or an `alarm`), and each part goes to the tier-0 targets of the escalation
 * policy that matches it (incidents/responders.ts, by incidents/policy.ts selectPolicy).
 */
import { cusumArl } from '../analysis/arl/cusumArl.ts';
import { ewmaArl } from '../analysis/arl/ewmaArl.ts';
import { normalCdf } from '../domain/normal.ts';
import { changeDesign, type DetectorDesign } from '../analysis/budget.ts';
import { populationMeasurands } from '../analysis/populationStats.ts';
import type { Config } from '../domain/config.ts';
import { RULE_FAMILIES, RULE_FAMILY_LABELS, type IncidentKind, type RuleFamily, type Severity } from '../domain/finding.ts';
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
  /** Sum of the families that can be derived: what `total` says it covers, not the configuration's whole noise. */
  readonly per100ComponentYears: number;
  readonly total: NoiseTotal;
  /** The derived noise by family, severity and incident kind: what the escalation policies are matched against. */
  readonly loads: readonly NoiseLoad[];
  readonly fleet: FleetNoise | null;
}

/** What the total adds up and what it leaves out. */
export interface NoiseTotal {
  /** Families with a figure, added up. */
  readonly families: readonly RuleFamily[];
  /** Of those, families whose figure is only a part of their noise (a floor): the sampling checks' fall side. */
  readonly inPart: readonly RuleFamily[];
  /** Families left out: set by the site's levels and the data, measured by wearshift backtest. */
  readonly excludes: readonly RuleFamily[];
  readonly basis: string;
}

/** One part of the derived noise: the incidents one family opens at one severity, of one kind. */
export interface NoiseLoad {
  readonly family: RuleFamily;
  readonly severity: Severity;
  readonly kind: IncidentKind;
  readonly per100ComponentYears: number;
}

export interface FleetNoise {
  readonly components: number;
  /** Incidents of the derived families (per100ComponentYears) from these components. */
  readonly incidentsPerDay: number;
  readonly incidentsPerWeek: number;
  /** Each tier-0 target of a policy that matches some part of the load, with the parts it hears of. */
  readonly responders: readonly ResponderNoise[];
  /** The parts no escalation policy matches: recorded and listed, heard of by nobody. */
  readonly unrouted: ResponderNoise | null;
  /** ISA-18.2's ~150 per operator per day (from memory), for scale. */
  readonly acceptablePerDay: number;
}

export interface ResponderNoise {
  /** `channel:target`; null for the unrouted parts. */
  readonly responder: string | null;
  readonly perDay: number;
  readonly perWeek: number;
  readonly heardOf: readonly Omit<NoiseLoad, 'per100ComponentYears'>[];
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
  const population = populationNoise(settings, samplesPerYear);
  byFamily.population = population.noise;
  const per100ComponentYears = round(
    RULE_FAMILIES.reduce((s, f) => s + (byFamily[f].per100ComponentYears ?? 0), 0),
    4,
  );
  const loads = mergeLoads([
    ...enabled.map((detector) => ({ family: detector, severity: 'watch' as const, kind: 'machine' as const, per100ComponentYears: byFamily[detector].per100ComponentYears! })),
    ...(byFamily.sampling.per100ComponentYears === null ? [] : [{ family: 'sampling' as const, severity: 'watch' as const, kind: 'sampling' as const, per100ComponentYears: byFamily.sampling.per100ComponentYears }]),
    ...population.loads,
  ]);
  return {
    group: settings.group,
    samplesPerYear: round(samplesPerYear, 4),
    budgetPer100ComponentYears: round((100 * d.budget.alarms) / d.budget.years, 4),
    byFamily,
    per100ComponentYears,
    total: noiseTotal(byFamily),
    loads,
    fleet: options.components === undefined ? null : fleetNoise(config, settings.group, per100ComponentYears, loads, options.components),
  };
}

/** One entry per family, severity and kind (the comparison with peers and single results are both group-limit cautions); none of 0. */
function mergeLoads(loads: readonly NoiseLoad[]): NoiseLoad[] {
  const out = new Map<string, NoiseLoad>();
  for (const l of loads) {
    if (!(l.per100ComponentYears > 0)) continue;
    const key = `${l.family}|${l.severity}|${l.kind}`;
    const before = out.get(key);
    out.set(key, before === undefined ? l : { ...l, per100ComponentYears: round(before.per100ComponentYears + l.per100ComponentYears, 4) });
  }
  return [...out.values()];
}

function noiseTotal(byFamily: Readonly<Record<RuleFamily, FamilyNoise>>): NoiseTotal {
  const families = RULE_FAMILIES.filter((f) => byFamily[f].per100ComponentYears !== null);
  const excludes = RULE_FAMILIES.filter((f) => byFamily[f].per100ComponentYears === null);
  const inPart: RuleFamily[] = families.filter((f) => f === 'sampling');
  const added = families.map((f) => (inPart.includes(f) ? `${RULE_FAMILY_LABELS[f]} (only the fall side of the charts)` : RULE_FAMILY_LABELS[f]));
  const left = [...excludes.map((f) => RULE_FAMILY_LABELS[f]), ...(inPart.length > 0 ? ['the other sampling checks'] : [])];
  return {
    families,
    inPart,
    excludes,
    basis:
      `adds ${words(added)}, the families it can derive; it excludes ${words(left)}, which depend on the site's levels and the data ` +
      '(wearshift backtest measures them), so it is not the configuration\'s whole noise',
  };
}

function words(list: readonly string[]): string {
  return list.length <= 1 ? (list[0] ?? 'nothing') : `${list.slice(0, -1).join(', ')} and ${list.at(-1)}`;
}

function populationNoise(settings: ComponentSettings, samplesPerYear: number): { noise: FamilyNoise; loads: NoiseLoad[] } {
  const p = settings.population;
  const parts: string[] = [];
  const loads: NoiseLoad[] = [];
  let perYear = 0;
  if (p.peers.enabled) {
    const peers = (p.peers.budgetShare * settings.detection.budget.alarms) / settings.detection.budget.years;
    perYear += peers;
    // A rate well above the peers' is a `caution` finding (rules/peers.ts).
    loads.push({ family: 'population', severity: 'caution', kind: 'machine', per100ComponentYears: round(100 * peers, 4) });
    parts.push(`comparison with peers: ${p.peers.budgetShare} of the budget, shared by the watched metals (an upper bound)`);
  }
  if (p.opensIncidents) {
    const tailAbove = (level: 'caution' | 'alarm') => (p.method === 'sigma' ? 1 - normalCdf(p.sigma[level]) : 1 - p.percentile[level] / 100);
    const tail = tailAbove('caution');
    // A result above the alarm level is an `alarm` finding, one between the levels a `caution` (rules/ruleInput.ts crossing).
    const alarmTail = Math.min(tail, tailAbove('alarm'));
    const measurands = populationMeasurands(p).length;
    const single = measurands * samplesPerYear * tail;
    perYear += single;
    loads.push(
      { family: 'population', severity: 'caution', kind: 'machine', per100ComponentYears: round(100 * measurands * samplesPerYear * (tail - alarmTail), 4) },
      { family: 'population', severity: 'alarm', kind: 'machine', per100ComponentYears: round(100 * measurands * samplesPerYear * alarmTail, 4) },
    );
    parts.push(`single results: ${measurands} measurands × ${round(samplesPerYear, 3)} samples × ${round(tail, 4)} above the caution level (upper bound)`);
  }
  return { noise: { per100ComponentYears: round(100 * perYear, 4), basis: parts.length === 0 ? 'advisory only' : parts.join('; ') }, loads };
}

/**
 * The load per tier-0 responder: each part of the load (family, severity, kind) goes to the targets of the policy
 * that matches it, so that a desk that hears only of `watch` incidents is not counted as hearing of the others.
 */
function fleetNoise(config: Config, group: string, per100: number, loads: readonly NoiseLoad[], components: number): FleetNoise {
  const map = tierZeroResponders(config.escalation.policies);
  const perDayOf = (per100ComponentYears: number) => (per100ComponentYears / 100) * (components / DAYS_PER_YEAR);
  const byResponder = new Map<string | null, { perDay: number; heardOf: Omit<NoiseLoad, 'per100ComponentYears'>[] }>();
  for (const load of loads) {
    const targets = map.of({ id: '', key: '', unit: '', component: '', group, kind: load.kind, peakSeverity: load.severity, timeline: [] });
    for (const target of targets.length === 0 ? [null] : targets) {
      const entry = byResponder.get(target) ?? { perDay: 0, heardOf: [] };
      entry.perDay += perDayOf(load.per100ComponentYears);
      entry.heardOf.push({ family: load.family, severity: load.severity, kind: load.kind });
      byResponder.set(target, entry);
    }
  }
  const noise = (responder: string | null): ResponderNoise => {
    const entry = byResponder.get(responder)!;
    return { responder, perDay: round(entry.perDay, 6), perWeek: round(entry.perDay * 7, 6), heardOf: entry.heardOf };
  };
  const perDay = perDayOf(per100);
  return {
    components,
    incidentsPerDay: round(perDay, 6),
    incidentsPerWeek: round(perDay * 7, 6),
    responders: [...byResponder.keys()]
      .filter((r): r is string => r !== null)
      .sort()
      .map(noise),
    unrouted: byResponder.has(null) ? noise(null) : null,
    acceptablePerDay: ACCEPTABLE_PER_DAY,
  };
}

function round(x: number, digits: number): number {
  const f = 10 ** digits;
  return Math.round(x * f) / f;
}
