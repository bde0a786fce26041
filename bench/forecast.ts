/**
 * The time-to-limit forecast's honesty check: on invented fleets whose true wear paths are known, does the stated
 * 10–90 % interval hold the true crossing time about 80 % of the time (target 70–90 %), and how far is the central
 * estimate from it?
 *
 * Fleet: like-for-like gearboxes; each component's Fe wear rate is 0.04 ppm/h times a lognormal factor (CV 30 %),
 * the wear process adds variance 0.4 × rate per hour, lab noise is 1 ppm + 5 %, samples every 100 h ± 40 %,
 * oil changes at exactly 1000 oil hours (the planned charge length the forecast is told) leaving 10 % behind,
 * make-up oil 1 L per 100 h into 200 L. The true level is followed in 5-hour steps between samples, so the true
 * crossing time of the fixed alarm level (30 ppm) is known to 5 h. A trusted group baseline is pooled from a
 * separate steady training fleet, so the filter has a rate from the first charge on.
 *
 * Scenarios: `steady` (the rate never changes); `doubled` (the rate doubles at a random time between 2000 and
 * 4000 unit hours); `ramp` (from such a time the rate grows linearly, doubling every 1000 h); `censored` (steady,
 * with readings under 10 ppm reported as "<10"). For doubled and ramp only forecasts made after the change count.
 *
 * At every sample the forecast of the Fe alarm crossing is made twice: as the product states it (reliability gates
 * on) and past the gates (the gate it would have stopped at is kept), so the table shows both what is said and
 * what the "not enough history" answers hide. A forecast covers the truth when the true crossing (∞ when the true
 * level stays under the level until the oil change) lies between its lower and upper percentile (an absent
 * percentile is beyond the oil change: ∞). Forecasts made when the level is already crossed (truly or by estimate)
 * are left out. Error: |central − true| in operating hours, where both fall within the charge.
 */
import { evaluateComponent } from '../src/analysis/evaluate.ts';
import { groupBaseline } from '../src/analysis/baseline.ts';
import { AnalysisFold, emptyAnalysisState } from '../src/analysis/fold/analysisFold.ts';
import type { BaselineSums, GroupStats } from '../src/analysis/model.ts';
import { parseConfig } from '../src/domain/configFile.ts';
import { parseResultEvent, type Sample } from '../src/domain/event.ts';
import { resolveSettings, type ComponentSettings } from '../src/domain/settings.ts';
import { seededRandom, type Random } from '../src/simulation/random.ts';
import type { PartResult } from './report.ts';
import { fmt, median, round } from './stats.ts';

export type ForecastScenario = 'steady' | 'doubled' | 'ramp' | 'censored';

export interface ForecastBenchOptions {
  readonly seed: number;
  /** Components per scenario. Default 300. */
  readonly components?: number;
  /** Steady components whose own baselines form the group baseline. Default 40. */
  readonly trainingComponents?: number;
  /** Samples per component. Default 60 (about 6000 h, six charges). */
  readonly samples?: number;
}

const GROUP = 'bench-forecast';
const LIMIT = 30;
const CHARGE_HOURS = 1000;
const STEP_HOURS = 5;
const HOUR_MS = 3_600_000;
const REPORTING_LIMIT = 10;

const CONFIG = `
detection:
  measurands: [Fe]
  labNoise: { absolute: 1, relative: 0.05 }
  runningInHours: 0
  budget: { sampleIntervalHours: 100 }
groups:
  - name: ${GROUP}
    sumpLitres: 200
    residualFraction: 0.1
    chargeHours: ${CHARGE_HOURS}
    limits: { Fe: { alarm: ${LIMIT} } }
`;

interface TruePath {
  /** Per charge: the true level every STEP_HOURS oil hours from 0 to the drain. */
  readonly charges: number[][];
}

interface Simulated {
  readonly samples: Sample[];
  /** Per sample: charge index on the true path, and whether the change (doubled, ramp) had begun. */
  readonly marks: { charge: number; changed: boolean }[];
  readonly path: TruePath;
}

function simulate(id: string, scenario: ForecastScenario, rng: Random, samples: number): Simulated {
  const rateFactor = Math.exp(0.2936 * rng.normal() - 0.0431); // lognormal, mean 1, CV 30 %
  const base = 0.04 * rateFactor;
  const q = 0.4 * base;
  const changeAt = 2000 + 2000 * rng.next();
  const rateAt = (t: number) =>
    scenario === 'doubled' && t >= changeAt ? 2 * base : scenario === 'ramp' && t >= changeAt ? base * (1 + (t - changeAt) / 1000) : base;
  const out: Sample[] = [];
  const marks: Simulated['marks'] = [];
  const charges: number[][] = [[0]];
  let level = 0;
  let unit = 0;
  let oil = 0;
  let charge = 0;
  let changed = false;
  const start = Date.parse('2026-01-05T00:00:00Z');
  for (let n = 0; n < samples; n++) {
    const h = 100 * rng.uniform(0.6, 1.4);
    let remaining = h;
    let drained = false;
    while (remaining > 1e-9) {
      const dt = Math.min(STEP_HOURS, remaining, CHARGE_HOURS - oil);
      level += rateAt(unit) * dt + Math.sqrt(q * dt) * rng.normal();
      level = Math.max(0, level);
      unit += dt;
      oil += dt;
      remaining -= dt;
      charges[charge]!.push(level);
      if (oil >= CHARGE_HOURS - 1e-9) {
        level *= 0.1;
        oil = 0;
        charge += 1;
        charges.push([level]);
        drained = true;
      }
    }
    const topUp = drained ? 0 : Math.round(h) / 100;
    if (!drained) level *= 1 - topUp / 200;
    const sd = Math.sqrt(1 + (0.05 * level) ** 2);
    const reading = Math.max(0, Math.round((level + sd * rng.normal()) * 10) / 10);
    const value = scenario === 'censored' && reading < REPORTING_LIMIT ? `<${REPORTING_LIMIT}` : reading;
    const parsed = parseResultEvent({
      sampleId: `${id}-${String(n + 1).padStart(3, '0')}`,
      unit: id,
      component: 'gearbox',
      group: GROUP,
      sampledAt: new Date(start + unit * HOUR_MS * 1.5).toISOString(),
      unitHours: Math.round(unit),
      oilHours: Math.round(oil),
      oilChanged: drained,
      topUpLitres: topUp,
      readings: { Fe: value },
    });
    if (!parsed.ok) throw new Error(`bench forecast: invalid simulated event: ${JSON.stringify(parsed.issues)}`);
    out.push(parsed.sample);
    changed ||= unit >= changeAt;
    marks.push({ charge, changed });
  }
  return { samples: out, marks, path: { charges } };
}

/** True oil hours of the first crossing after `fromOil` on the charge; Infinity when it stays under until the drain. */
function trueCrossing(path: TruePath, charge: number, fromOil: number): number {
  const levels = path.charges[charge]!;
  const first = Math.ceil(fromOil / STEP_HOURS);
  for (let i = Math.max(first, 0); i < levels.length; i++) if (levels[i]! >= LIMIT) return i * STEP_HOURS;
  return Infinity;
}

interface Outcome {
  covered: boolean;
  /** Not covered: the true crossing came before the interval (the forecast was late) or after it. */
  miss?: 'before' | 'after';
  /** The true level crosses within the charge. */
  crosses: boolean;
  error?: number;
  gate?: string;
  method: string;
  firstCharge: boolean;
}

function scoreComponent(sim: Simulated, settings: ComponentSettings, group: GroupStats, scenario: ForecastScenario): Outcome[] {
  const fold = new AnalysisFold(settings, emptyAnalysisState(sim.samples[0]!.unit, 'gearbox'));
  const out: Outcome[] = [];
  sim.samples.forEach((sample, i) => {
    fold.advance(sample, group);
    const mark = sim.marks[i]!;
    if ((scenario === 'doubled' || scenario === 'ramp') && !mark.changed) return;
    const f = fold.forecast(group, { measurands: ['Fe'], gates: false });
    const m = f?.measurands[0];
    const limit = m?.limits.find((l) => l.source === 'fixed' && l.severity === 'alarm');
    if (m === undefined || limit === undefined || m.status !== 'forecast' || limit.outcome === 'already' || limit.outcome === 'not-enough-history') return;
    const now = sample.oilHours!;
    const truth = trueCrossing(sim.path, mark.charge, now);
    if (truth <= now) return;
    const lo = limit.early?.oilHours ?? Infinity;
    const hi = limit.late?.oilHours ?? Infinity;
    const covered = truth === Infinity ? hi === Infinity : truth >= lo && truth <= hi;
    const central = limit.central?.oilHours;
    out.push({
      covered,
      ...(!covered && { miss: truth < lo ? ('before' as const) : ('after' as const) }),
      crosses: truth !== Infinity,
      ...(central !== undefined && truth !== Infinity && { error: Math.abs(central - truth) }),
      ...(m.gatedBy !== undefined && { gate: gateName(m.gatedBy) }),
      method: m.basis!.method,
      firstCharge: mark.charge === 0,
    });
  });
  return out;
}

function gateName(reason: string): string {
  if (reason.startsWith('first charge')) return 'first charge';
  if (reason.includes('censored')) return 'censored readings';
  return 'too few samples';
}

function trainingGroup(settings: ComponentSettings, seed: number, n: number, samples: number): GroupStats {
  const sums: BaselineSums[] = [];
  for (let i = 0; i < n; i++) {
    const sim = simulate(`TRAIN-${i}`, 'steady', seededRandom(seed * 7919 + i), samples);
    const own = evaluateComponent(sim.samples, settings).baselines.Fe;
    if (own !== undefined) sums.push(own);
  }
  const baseline = groupBaseline(sums, settings.detection.budget.sampleIntervalHours);
  if (baseline === undefined) throw new Error('bench forecast: the training fleet gave no group baseline');
  return { group: GROUP, bands: {}, baselines: { Fe: baseline } };
}

interface Figures {
  n: number;
  coverage: number;
  /** Coverage among the forecasts whose true crossing falls within the charge. */
  crossingCoverage: number;
  medianError: number;
  /** Share of forecasts whose true crossing came before the interval's lower percentile. */
  before: number;
  after: number;
}

function figures(outcomes: readonly Outcome[]): Figures {
  const errors = outcomes.flatMap((o) => (o.error === undefined ? [] : [o.error]));
  const crossing = outcomes.filter((o) => o.crosses);
  return {
    n: outcomes.length,
    coverage: outcomes.filter((o) => o.covered).length / Math.max(1, outcomes.length),
    crossingCoverage: crossing.filter((o) => o.covered).length / Math.max(1, crossing.length),
    medianError: median(errors),
    before: outcomes.filter((o) => o.miss === 'before').length / Math.max(1, outcomes.length),
    after: outcomes.filter((o) => o.miss === 'after').length / Math.max(1, outcomes.length),
  };
}

export function runForecast(options: ForecastBenchOptions): PartResult {
  const components = options.components ?? 300;
  const samples = options.samples ?? 60;
  const settings = resolveSettings(parseConfig(CONFIG), { unit: 'x', component: 'gearbox', group: GROUP });
  const group = trainingGroup(settings, options.seed, options.trainingComponents ?? 40, samples);
  const scenarios: ForecastScenario[] = ['steady', 'doubled', 'ramp', 'censored'];
  const rows: string[][] = [];
  const json: Record<string, unknown> = { components, samples, limitPpm: LIMIT, chargeHours: CHARGE_HOURS };
  for (const scenario of scenarios) {
    const all: Outcome[] = [];
    for (let i = 0; i < components; i++) {
      const sim = simulate(`${scenario.toUpperCase()}-${i}`, scenario, seededRandom(options.seed * 104729 + i * 31 + scenarios.indexOf(scenario)), samples);
      all.push(...scoreComponent(sim, settings, group, scenario));
    }
    const stated = figures(all.filter((o) => o.gate === undefined));
    const byGate = new Map<string, Outcome[]>();
    for (const o of all) if (o.gate !== undefined) byGate.set(o.gate, [...(byGate.get(o.gate) ?? []), o]);
    const row = (label: string, f: Figures) => [scenario, label, String(f.n), `${fmt(f.coverage * 100)} %`, `${fmt(f.crossingCoverage * 100)} %`, `${fmt(f.before * 100)} %`, `${fmt(f.after * 100)} %`, fmt(f.medianError)];
    rows.push(row('stated', stated));
    for (const method of ['filter', 'filter-since-signal', 'trend']) {
      const list = all.filter((o) => o.gate === undefined && o.method === method);
      if (list.length > 0 && list.length < all.length) rows.push(row(`  of which ${method}`, figures(list)));
    }
    const first = all.filter((o) => o.gate === undefined && o.firstCharge);
    if (first.length > 0) rows.push(row('  of which first charge', figures(first)));
    const gates: Record<string, unknown> = {};
    for (const [gate, list] of [...byGate].sort()) {
      const f = figures(list);
      rows.push(row(`gated: ${gate}`, f));
      gates[gate] = { n: f.n, coverage: round(f.coverage), crossingCoverage: round(f.crossingCoverage), medianAbsErrorHours: round(f.medianError) };
    }
    const byMethod: Record<string, unknown> = {};
    for (const method of ['filter', 'filter-since-signal', 'trend']) {
      const f = figures(all.filter((o) => o.gate === undefined && o.method === method));
      if (f.n > 0) byMethod[method] = { n: f.n, coverage: round(f.coverage), crossingCoverage: round(f.crossingCoverage), medianAbsErrorHours: round(f.medianError) };
    }
    const fc = figures(first);
    const shares = (f: Figures) => ({ truthBefore: round(f.before), truthAfter: round(f.after) });
    json[scenario] = {
      stated: { n: stated.n, coverage: round(stated.coverage), crossingCoverage: round(stated.crossingCoverage), ...shares(stated), medianAbsErrorHours: round(stated.medianError) },
      byMethod,
      firstCharge: { n: fc.n, coverage: round(fc.coverage), crossingCoverage: round(fc.crossingCoverage), medianAbsErrorHours: round(fc.medianError) },
      gates,
    };
  }
  return {
    name: 'forecast',
    json,
    table: { columns: ['scenario', 'forecasts', 'n', '10–90 % coverage', 'where it crosses', 'truth before', 'truth after', 'median |error| h'], rows },
    notes: [
      `${components} components per scenario, ${samples} samples each (every 100 h ± 40 %), oil change at ${CHARGE_HOURS} oil hours, Fe alarm level ${LIMIT} ppm.`,
      'stated: what the product says; gated: forecasts the product replaces by "not enough history to forecast", by the gate that stops them.',
      'Coverage target 70–90 % for the 10–90 % interval; "where it crosses": among forecasts whose true level crosses before the oil change. doubled and ramp: forecasts made after the change only.',
    ],
  };
}
