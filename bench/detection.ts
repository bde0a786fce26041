/**
 * The product's main claim, measured: on the synthetic fleet (fleet.ts), how soon after a wear-rate step does each
 * rule family speak, when every family is allowed the same number of false alarms?
 *
 * Families (all through evaluateComponent, the code the worker runs):
 * - `population`: a fixed limit on the Fe reading per oil-hours band, mean + m·σ of a separate in-control training
 *   fleet's readings (what a site sets from its own population; m = 2 is the usual second level);
 * - `rate`: a fixed limit on the interval wear rate, mean + k·σ of the training fleet's in-control interval rates;
 * - `ewma`, `cusum`: the change detectors with the group's settings (λ = 0.2, k = 0.5, two-sided, own baseline of
 *   the first 12 stable intervals), their L and h the only knobs.
 *
 * Matching: each family's knob is set by bisection on an in-control tuning fleet so that its false alarms per 100
 * component-years come to the target or just under; a fresh in-control test fleet then gives the achieved rate out
 * of sample. A false alarm is an alarm episode on in-control data: a run of consecutive samples at which the family
 * fires (the incident engine keeps one incident open while findings persist). Every family is judged on the same
 * window: the samples after the detectors' baseline (sample 14 on); the detectors are silent while they learn.
 * A component-year is 8760 operating hours (the false-alarm budget's default: continuous duty, 35 samples).
 *
 * Steps: the Fe wear rate of each stepped component is multiplied by 1.5, 2 or 3 at a uniformly random time in the
 * 20 sampling intervals after the baseline. Delay counts the samples taken after the step up to the first one at
 * which the family fires upward (1: the first sample after the step), and the operating hours from the step to it;
 * a step not caught within `horizon` samples counts as a miss (an infinite delay in the percentiles). "Before the
 * fixed limit": the share of steps the family caught at an earlier sample than the matched population limit did
 * (or caught when that limit missed).
 */
import { mean, sampleStandardDeviation } from 'simple-statistics';
import { detectionLimits } from '../src/analysis/budget.ts';
import { evaluateComponent } from '../src/analysis/evaluate.ts';
import { buildHistory } from '../src/analysis/history.ts';
import { wearIntervals } from '../src/analysis/intervals.ts';
import type { GroupStats } from '../src/analysis/model.ts';
import { populationBands } from '../src/analysis/populationStats.ts';
import type { Budget } from '../src/domain/config.ts';
import { parseConfig } from '../src/domain/configFile.ts';
import type { RuleFamily } from '../src/domain/finding.ts';
import { resolveSettings, type ComponentSettings } from '../src/domain/settings.ts';
import { COMPONENT, FLEET_CONFIG, FLEET_MODEL, GROUP, simulateFleet, type SimulatedComponent } from './fleet.ts';
import type { PartResult } from './report.ts';
import { fmt, median, percentile, round } from './stats.ts';

export interface DetectionOptions {
  /** In-control components whose readings and rates set the population and rate limits. Default 300. */
  trainingComponents?: number;
  /** In-control components the thresholds are tuned on. Default 1500. */
  tuningComponents?: number;
  /** Fresh in-control components for the achieved false-alarm rates. Default 1500. */
  testComponents?: number;
  /** Stepped components per step factor. Default 800. */
  steppedComponents?: number;
  /** Default [1.5, 2, 3]. */
  factors?: readonly number[];
  /** Monitored samples per in-control component. Default 70 (two years). */
  monitoredSamples?: number;
  /** Sampling intervals after the baseline within which the step falls. Default 20. */
  stepWindow?: number;
  /** Samples after the step within which a detection counts. Default 40. */
  horizon?: number;
  /** The false-alarm budget every family is matched to. Default 1 per component per 5 years (20 per 100 component-years). */
  budget?: Pick<Budget, 'alarms' | 'years'>;
  /** Bisection steps per knob (each halves the knob's range on a log scale). Default 12. */
  iterations?: number;
  seed?: number;
}

type Rule = Extract<RuleFamily, 'population' | 'rate' | 'ewma' | 'cusum'>;
const RULES: readonly Rule[] = ['population', 'rate', 'ewma', 'cusum'];
type Knobs = Partial<Record<Rule, number>>;

/**
 * How false alarms are counted. `alarms`: a run of consecutive firing samples is one false alarm (a limit's memoryless
 * exceedance, a chart's excursion beyond its limit). `incidents`: a firing after at least `gap` clean samples is one:
 * with the incident engine's defaults an acknowledged incident returns to normal after 2 clean samples and a finding
 * within 3 more reopens it, so only a gap of 5 opens a new incident (a new page).
 */
const COUNTINGS = ['alarms', 'incidents'] as const;
type Counting = (typeof COUNTINGS)[number];

function countingsOf(incidentGap: number): Record<Counting, number> {
  return { alarms: 1, incidents: incidentGap };
}

interface Variant {
  readonly id: string;
  readonly rule: Rule;
  readonly knob: number;
  /** The counting the variant was matched under, and whose fixed limit it is compared with. */
  readonly counting: Counting;
}

/** The knob ranges the bisection searches (population and rate: multipliers of σ; ewma: L; cusum: h). */
const KNOB_RANGE: Record<Rule, [number, number]> = { population: [1, 8], rate: [1, 12], ewma: [1, 6], cusum: [1, 25] };
const HOURS_PER_COMPONENT_YEAR = 8760;
/** The usual second statistical level, as a site sets it (common practice). */
const SITE_SIGMA = 2;

interface Traces {
  /** Per variant: fired at sample i (any direction), fired upward at sample i. */
  readonly fired: Map<string, { any: Uint8Array; up: Uint8Array }>;
}

interface Limits {
  readonly group: GroupStats;
  readonly rate: { readonly mean: number; readonly sd: number };
}

/** What every evaluation of the benchmark shares. */
interface Context {
  readonly base: ComponentSettings;
  readonly limits: Limits;
  /** Index of the first monitored sample: the one after the detectors' own baseline. */
  readonly monitorFrom: number;
  /** Per counting: how many samples after a firing a further firing still belongs to the same false alarm. */
  readonly countings: Record<Counting, number>;
}

export function runDetection(options: DetectionOptions = {}): PartResult {
  const o = {
    trainingComponents: 300,
    tuningComponents: 1500,
    testComponents: 1500,
    steppedComponents: 800,
    factors: [1.5, 2, 3],
    monitoredSamples: 70,
    stepWindow: 20,
    horizon: 40,
    budget: { alarms: 1, years: 5 },
    iterations: 12,
    seed: 1,
    ...options,
  };
  const started = performance.now();
  const config = parseConfig(FLEET_CONFIG, 'detection benchmark');
  const base = resolveSettings(config, { unit: 'bench', component: COMPONENT, group: GROUP });
  const monitorFrom = base.detection.baselineIntervals + 1;
  const countings = countingsOf(config.incidents.returnAfterSamples + config.incidents.reopenWithinSamples);
  const inControlSamples = monitorFrom + o.monitoredSamples;
  const target = (100 * o.budget.alarms) / o.budget.years;

  const training = simulateFleet(o.trainingComponents, { fleetSeed: o.seed * 10 + 1, samples: inControlSamples });
  const limits = learnLimits(training, base);
  const ctx: Context = { base, limits, monitorFrom, countings };
  const tuning = simulateFleet(o.tuningComponents, { fleetSeed: o.seed * 10 + 2, samples: inControlSamples });
  const test = simulateFleet(o.testComponents, { fleetSeed: o.seed * 10 + 3, samples: inControlSamples });

  const tuned = Object.fromEntries(COUNTINGS.map((c) => [c, tune(tuning, ctx, c, target, o.iterations)])) as Record<Counting, Tuned>;
  const design = designKnobs(base, o.budget);
  const matched = COUNTINGS.map((c) => RULES.map((rule): Variant => ({ id: matchedId(rule, c), rule, knob: tuned[c].knobs[rule], counting: c })));
  const reference: Variant[] = [
    { id: `population ${SITE_SIGMA}σ (site)`, rule: 'population', knob: SITE_SIGMA, counting: 'alarms' },
    { id: 'ewma (design L)', rule: 'ewma', knob: design.ewma, counting: 'alarms' },
    { id: 'cusum (design h)', rule: 'cusum', knob: design.cusum, counting: 'alarms' },
  ];
  const passes = [...matched, reference];
  const variants = passes.flat();

  const testAlarms = falseAlarmsOfFleet(test, passes, ctx);
  const steps = o.factors.map((factor, f) => {
    const stepped = simulateFleet(o.steppedComponents, {
      fleetSeed: o.seed * 10 + 4 + f,
      samples: monitorFrom + o.stepWindow + o.horizon,
      step: (hours, next) => ({ atHours: hours[monitorFrom - 1]! + next() * (hours[monitorFrom - 1 + o.stepWindow]! - hours[monitorFrom - 1]!), factor }),
    });
    return { factor, byVariant: stepOutcomes(stepped, passes, ctx, o.horizon) };
  });

  const rows: string[][] = [];
  const jsonSteps: Record<string, unknown>[] = [];
  for (const s of steps) {
    for (const v of variants) {
      const d = s.byVariant.get(v.id)!;
      const fa = testAlarms.get(v.id)!;
      const isFixed = v.id === matchedId('population', v.counting);
      rows.push([
        v.id,
        `×${s.factor}`,
        fmt(fa.alarms.per100),
        fmt(fa.incidents.per100),
        fmt(d.preStepPer100[v.counting]),
        `${fmt(100 * d.detected)} %`,
        fmt(d.medianSamples),
        fmt(d.p90Samples),
        fmt(d.medianHours),
        fmt(d.p90Hours),
        isFixed ? '–' : `${fmt(100 * d.beforeFixed)} %`,
      ]);
      jsonSteps.push({
        factor: s.factor,
        family: v.id,
        detected: round(d.detected),
        medianDelaySamples: round(d.medianSamples),
        p90DelaySamples: round(d.p90Samples),
        medianDelayHours: round(d.medianHours),
        p90DelayHours: round(d.p90Hours),
        caughtBeforeFixedLimit: isFixed ? null : round(d.beforeFixed),
        falseAlarmsPer100ComponentYearsBeforeStep: round(d.preStepPer100[v.counting]),
      });
    }
  }

  const stepTwo = steps.find((s) => s.factor === 2);
  const verdicts = COUNTINGS.map((c) => targetVerdict(stepTwo, testAlarms, c));
  const seconds = (performance.now() - started) / 1000;
  const thresholds = Object.fromEntries(
    COUNTINGS.map((c) => {
      const k = tuned[c].knobs;
      return [
        c,
        {
          populationSigmaMultiplier: round(k.population),
          rateSigmaMultiplier: round(k.rate),
          rateLevelPer100h: round(limits.rate.mean + k.rate * limits.rate.sd),
          ewmaL: round(k.ewma),
          cusumH: round(k.cusum),
          achievedOnTuningFleet: Object.fromEntries(RULES.map((r) => [r, round(tuned[c].achieved[r])])),
        },
      ];
    }),
  );
  const designEwma = testAlarms.get('ewma (design L)')!;
  const designCusum = testAlarms.get('cusum (design h)')!;
  const falseAlarms = Object.fromEntries(
    variants.map((v) => {
      const a = testAlarms.get(v.id)!;
      return [
        v.id,
        {
          alarmsPer100ComponentYears: round(a.alarms.per100),
          incidentsPer100ComponentYears: round(a.incidents.per100),
          alarms: a.alarms.count,
          incidents: a.incidents.count,
          arlToFirstSamples: round(a.arlToFirst),
        },
      ];
    }),
  );
  const json = {
    seconds: round(seconds, 3),
    model: { ...FLEET_MODEL, config: FLEET_CONFIG.trim() },
    sizes: {
      trainingComponents: o.trainingComponents,
      tuningComponents: o.tuningComponents,
      testComponents: o.testComponents,
      steppedComponentsPerFactor: o.steppedComponents,
      monitoredSamples: o.monitoredSamples,
      monitoringFromSample: monitorFrom + 1,
      stepWindow: o.stepWindow,
      horizon: o.horizon,
      testComponentYears: round(designEwma.years),
    },
    targetFalseAlarmsPer100ComponentYears: target,
    countings: Object.fromEntries(COUNTINGS.map((c) => [c, { newAfterCleanSamples: countings[c] }])),
    rules: {
      population: { bandHours: base.population.bandHours, trainingComponents: o.trainingComponents, siteSigmaMultiplier: SITE_SIGMA },
      rate: { trainingMeanPer100h: round(limits.rate.mean), trainingSdPer100h: round(limits.rate.sd) },
      ewma: { lambda: base.detection.ewma.lambda, designL: round(design.ewma) },
      cusum: { k: base.detection.cusum.k, headstart: base.detection.cusum.headstart, designH: round(design.cusum) },
      sided: base.detection.sided,
      baselineIntervals: base.detection.baselineIntervals,
      designArl0Samples: round(design.arl0),
    },
    thresholds,
    falseAlarms,
    steps: jsonSteps,
    target: { met: verdicts.every((v) => v.met === true), ...Object.fromEntries(COUNTINGS.map((c, i) => [c, verdicts[i]!.detectors])) },
  };
  const notes = [
    `false-alarm target: ${fmt(target)} per 100 component-years per family (budget ${o.budget.alarms} per component per ${o.budget.years} years), matched twice:`,
    `  "alarms": a run of consecutive firing samples is one false alarm; "incidents": a firing after ${countings.incidents} clean samples is one (an acknowledged incident returns after ` +
      `${config.incidents.returnAfterSamples} clean samples, a finding within ${config.incidents.reopenWithinSamples} more reopens it)`,
    ...COUNTINGS.map((c) => {
      const k = tuned[c].knobs;
      const a = tuned[c].achieved;
      return (
        `  matched ${c}: population mean + ${fmt(k.population)}σ (${fmt(a.population)}), rate mean + ${fmt(k.rate)}σ = ${fmt(limits.rate.mean + k.rate * limits.rate.sd)} ppm/100 h (${fmt(a.rate)}), ` +
        `EWMA L ${fmt(k.ewma)} (${fmt(a.ewma)}), CUSUM h ${fmt(k.cusum)} (${fmt(a.cusum)}); achieved on the tuning fleet in brackets`
      );
    }),
    `design check: the product's L ${fmt(design.ewma)} and h ${fmt(design.cusum)} for this budget (ARL0 ${fmt(design.arl0)} samples per chart) give on the test fleet ` +
      `an ARL to the first false signal of ${fmt(designEwma.arlToFirst)} (EWMA) and ${fmt(designCusum.arlToFirst)} (CUSUM) samples, ` +
      `${fmt(designEwma.alarms.per100)} / ${fmt(designCusum.alarms.per100)} false alarms per 100 component-years`,
    `sizes: training ${o.trainingComponents}, tuning ${o.tuningComponents}, test ${o.testComponents} in-control components × ${inControlSamples} samples ` +
      `(monitored from sample ${monitorFrom + 1}); ${o.steppedComponents} stepped per factor × ${monitorFrom + o.stepWindow + o.horizon} samples; ${fmt(seconds)} s`,
    `columns: FA = false alarms per 100 component-years on the fresh in-control test fleet (alarms / incidents) and before the step on the stepped fleets; ` +
      `delays in samples after the step and operating hours; misses count as ∞`,
    ...verdicts.flatMap((v) => v.lines),
  ];
  return {
    name: 'detection',
    json,
    table: { columns: ['family', 'step', 'FA alarms', 'FA incid.', 'FA pre', 'detected', 'median', 'p90', 'median h', 'p90 h', 'before fixed'], rows },
    notes,
  };
}

function matchedId(rule: Rule, counting: Counting): string {
  return `${rule}, matched ${counting}`;
}

/** Population bands of the training fleet's readings and the spread of its in-control interval rates. */
function learnLimits(training: readonly SimulatedComponent[], base: ComponentSettings): Limits {
  const bands = populationBands(
    training.flatMap((c) => c.samples),
    base.population,
    ['Fe'],
  );
  const rates = training.flatMap((c) =>
    wearIntervals(buildHistory(c.samples), 'Fe', base)
      .filter((iv) => !iv.censored && !iv.runningIn)
      .map((iv) => iv.rate * 100),
  );
  return { group: { group: GROUP, bands, baselines: {} }, rate: { mean: mean(rates), sd: sampleStandardDeviation(rates) } };
}

/** The settings that run exactly the given families at the given knobs (every other family off). */
function settingsFor(base: ComponentSettings, knobs: Knobs, rate: Limits['rate']): ComponentSettings {
  const d = base.detection;
  return {
    ...base,
    limits: {},
    rateLimits: knobs.rate === undefined ? {} : { Fe: { alarm: rate.mean + knobs.rate * rate.sd } },
    population: {
      ...base.population,
      measurands: knobs.population === undefined ? [] : ['Fe'],
      sigma: { caution: knobs.population ?? SITE_SIGMA, alarm: knobs.population ?? SITE_SIGMA },
    },
    detection: {
      ...d,
      ewma: { enabled: knobs.ewma !== undefined, lambda: d.ewma.lambda, L: knobs.ewma ?? 3 },
      cusum: { enabled: knobs.cusum !== undefined, k: d.cusum.k, h: knobs.cusum ?? 5, headstart: d.cusum.headstart },
    },
  };
}

/** L and h as the product derives them from a budget spent on this one chart. */
function designKnobs(base: ComponentSettings, budget: Pick<Budget, 'alarms' | 'years'>): { ewma: number; cusum: number; arl0: number } {
  const d = { ...base.detection, budget: { ...base.detection.budget, ...budget } };
  const ewma = detectionLimits({ ...d, ewma: { enabled: true, lambda: d.ewma.lambda }, cusum: { ...d.cusum, enabled: false } });
  const cusum = detectionLimits({ ...d, cusum: { enabled: true, k: d.cusum.k, headstart: d.cusum.headstart }, ewma: { ...d.ewma, enabled: false } });
  return { ewma: ewma.ewmaL, cusum: cusum.cusumH, arl0: ewma.arl0 };
}

function trace(c: SimulatedComponent, pass: readonly Variant[], { base, limits, monitorFrom }: Context): Traces {
  const knobs: Knobs = Object.fromEntries(pass.map((v) => [v.rule, v.knob]));
  const evaluation = evaluateComponent(c.samples, settingsFor(base, knobs, limits.rate), limits.group);
  const n = c.samples.length;
  const fired = new Map(pass.map((v) => [v.id, { any: new Uint8Array(n), up: new Uint8Array(n) }]));
  const byRule = new Map(pass.map((v) => [v.rule, fired.get(v.id)!]));
  evaluation.steps.forEach((step, i) => {
    for (const f of step.findings) {
      const t = byRule.get(f.rule as Rule);
      if (t === undefined) continue;
      if ((f.rule === 'ewma' || f.rule === 'cusum') && i < monitorFrom) {
        throw new Error(`${c.unit}: ${f.rule} fired at sample ${i + 1}, inside its baseline; the monitoring window assumption is wrong`);
      }
      t.any[i] = 1;
      if (f.direction !== 'down') t.up[i] = 1;
    }
  });
  return { fired };
}

/** False alarms that start within samples [from, to] (inclusive): a firing more than `gap` samples after the previous one. */
export function episodes(any: Uint8Array, from: number, to: number, gap: number): number {
  let count = 0;
  let lastFired = -Infinity;
  for (let i = 0; i <= to && i < any.length; i++) {
    if (!any[i]) continue;
    if (i >= from && i - lastFired > gap) count++;
    lastFired = i;
  }
  return count;
}

interface AlarmRate {
  count: number;
  per100: number;
  /** Per component, in fleet order (for paired comparisons between families on the same components). */
  perComponent: number[];
}

interface FleetAlarms extends Record<Counting, AlarmRate> {
  readonly years: number;
  /** Monitored samples to the first firing, estimated from right-censored run lengths (samples / firsts). */
  readonly arlToFirst: number;
}

function falseAlarmsOfFleet(fleet: readonly SimulatedComponent[], passes: readonly (readonly Variant[])[], ctx: Context): Map<string, FleetAlarms> {
  const { monitorFrom } = ctx;
  const counts = new Map<string, { alarms: number[]; incidents: number[]; runSamples: number; firsts: number }>();
  let hours = 0;
  for (const c of fleet) {
    hours += c.hours.at(-1)! - c.hours[monitorFrom - 1]!;
    const last = c.samples.length - 1;
    for (const pass of passes) {
      for (const [id, t] of trace(c, pass, ctx).fired) {
        const n = counts.get(id) ?? { alarms: [], incidents: [], runSamples: 0, firsts: 0 };
        n.alarms.push(episodes(t.any, monitorFrom, last, ctx.countings.alarms));
        n.incidents.push(episodes(t.any, monitorFrom, last, ctx.countings.incidents));
        const first = t.any.indexOf(1, monitorFrom);
        n.runSamples += first < 0 ? last - monitorFrom + 1 : first - monitorFrom + 1;
        if (first >= 0) n.firsts++;
        counts.set(id, n);
      }
    }
  }
  const years = hours / HOURS_PER_COMPONENT_YEAR;
  const rate = (perComponent: number[]): AlarmRate => {
    const count = perComponent.reduce((a, b) => a + b, 0);
    return { count, per100: (100 * count) / years, perComponent };
  };
  return new Map([...counts].map(([id, n]) => [id, { years, alarms: rate(n.alarms), incidents: rate(n.incidents), arlToFirst: n.runSamples / n.firsts }]));
}

interface Tuned {
  readonly knobs: Record<Rule, number>;
  /** False alarms per 100 component-years at the chosen knobs, on the tuning fleet. */
  readonly achieved: Record<Rule, number>;
}

/**
 * Bisection (on a log scale) of every family's knob at once: one evaluation per component per round serves all four.
 * The chosen knob is the smallest tried whose false-alarm rate is at or under the target.
 */
function tune(fleet: readonly SimulatedComponent[], ctx: Context, counting: Counting, target: number, iterations: number): Tuned {
  const lo = Object.fromEntries(RULES.map((r) => [r, KNOB_RANGE[r][0]])) as Record<Rule, number>;
  const hi = Object.fromEntries(RULES.map((r) => [r, KNOB_RANGE[r][1]])) as Record<Rule, number>;
  const rateAt = (knobs: Record<Rule, number>): Record<Rule, number> => {
    const pass = RULES.map((rule): Variant => ({ id: rule, rule, knob: knobs[rule], counting }));
    const alarms = falseAlarmsOfFleet(fleet, [pass], ctx);
    return Object.fromEntries(RULES.map((r) => [r, alarms.get(r)![counting].per100])) as Record<Rule, number>;
  };
  const atLo = rateAt(lo);
  const achieved = rateAt(hi);
  for (const r of RULES) {
    if (achieved[r] > target) throw new Error(`${r}: even at ${hi[r]} the false-alarm rate ${fmt(achieved[r])} exceeds the target ${target}; widen the search range`);
    if (atLo[r] <= target) throw new Error(`${r}: already at ${lo[r]} the false-alarm rate ${fmt(atLo[r])} is within the target ${target}; widen the search range`);
  }
  for (let n = 0; n < iterations; n++) {
    const mid = Object.fromEntries(RULES.map((r) => [r, Math.sqrt(lo[r] * hi[r])])) as Record<Rule, number>;
    const rate = rateAt(mid);
    for (const r of RULES) {
      if (rate[r] > target) lo[r] = mid[r];
      else {
        hi[r] = mid[r];
        achieved[r] = rate[r];
      }
    }
  }
  return { knobs: hi, achieved };
}

interface StepFigures {
  detected: number;
  medianSamples: number;
  p90Samples: number;
  medianHours: number;
  p90Hours: number;
  beforeFixed: number;
  preStepPer100: Record<Counting, number>;
}

function stepOutcomes(fleet: readonly SimulatedComponent[], passes: readonly (readonly Variant[])[], ctx: Context, horizon: number): Map<string, StepFigures> {
  const { monitorFrom } = ctx;
  const delays = new Map<string, { samples: number[]; hours: number[]; at: number[] }>();
  const pre = new Map<string, Record<Counting, number>>();
  let preHours = 0;
  for (const c of fleet) {
    const step = c.step!;
    let lastBefore = monitorFrom - 1;
    while (lastBefore + 1 < c.hours.length && c.hours[lastBefore + 1]! <= step.atHours) lastBefore++;
    preHours += step.atHours - c.hours[monitorFrom - 1]!;
    for (const pass of passes) {
      for (const [id, t] of trace(c, pass, ctx).fired) {
        const p = pre.get(id) ?? { alarms: 0, incidents: 0 };
        for (const counting of COUNTINGS) p[counting] += episodes(t.any, monitorFrom, lastBefore, ctx.countings[counting]);
        pre.set(id, p);
        let at = Infinity;
        for (let i = lastBefore + 1; i <= lastBefore + horizon && i < c.samples.length; i++) {
          if (t.up[i]) {
            at = i;
            break;
          }
        }
        const d = delays.get(id) ?? { samples: [], hours: [], at: [] };
        d.samples.push(at - lastBefore);
        d.hours.push(Number.isFinite(at) ? c.hours[at]! - step.atHours : Infinity);
        d.at.push(at);
        delays.set(id, d);
      }
    }
  }
  const years = preHours / HOURS_PER_COMPONENT_YEAR;
  const counting = new Map(passes.flat().map((v) => [v.id, v.counting]));
  const byVariant = new Map<string, StepFigures>();
  for (const [id, d] of delays) {
    const fixedAt = delays.get(matchedId('population', counting.get(id)!))!.at;
    const p = pre.get(id)!;
    byVariant.set(id, {
      detected: d.at.filter(Number.isFinite).length / d.at.length,
      medianSamples: median(d.samples),
      p90Samples: percentile(d.samples, 0.9),
      medianHours: median(d.hours),
      p90Hours: percentile(d.hours, 0.9),
      beforeFixed: d.at.filter((a, i) => a < fixedAt[i]!).length / d.at.length,
      preStepPer100: { alarms: (100 * p.alarms) / years, incidents: (100 * p.incidents) / years },
    });
  }
  return byVariant;
}

/**
 * Target: for a ×2 step, EWMA and CUSUM median delay at most half that of the fixed (population) limit, at an equal
 * or lower false-alarm rate. The rates are matched on the tuning fleet by construction (each at or just under the
 * target); on the fresh test fleet the detector's rate must not exceed the fixed limit's by more than two standard
 * errors of the paired difference (per component, both families on the same components: false alarms cluster in
 * components, so a Poisson error would be too small).
 */
function targetVerdict(
  step: { factor: number; byVariant: Map<string, StepFigures> } | undefined,
  testAlarms: Map<string, FleetAlarms>,
  counting: Counting,
): { met: boolean | null; detectors: Record<string, unknown>[]; lines: string[] } {
  if (step === undefined) return { met: null, detectors: [], lines: [`target (×2 step, ${counting}): not evaluated (no ×2 step in this run)`] };
  const fixed = matchedId('population', counting);
  const f = step.byVariant.get(fixed)!;
  const fa = testAlarms.get(fixed)!;
  const detectors = (['ewma', 'cusum'] as const).map((rule) => {
    const id = matchedId(rule, counting);
    const d = step.byVariant.get(id)!;
    const a = testAlarms.get(id)!;
    const se = pairedStandardError(a[counting].perComponent, fa[counting].perComponent, a.years);
    const alarmsOk = a[counting].per100 <= fa[counting].per100 + 2 * se;
    const samplesOk = d.medianSamples <= f.medianSamples / 2;
    const hoursOk = d.medianHours <= f.medianHours / 2;
    return {
      family: id,
      medianDelaySamples: round(d.medianSamples),
      fixedMedianDelaySamples: round(f.medianSamples),
      medianDelayHours: round(d.medianHours),
      fixedMedianDelayHours: round(f.medianHours),
      falseAlarmsTest: round(a[counting].per100),
      fixedFalseAlarmsTest: round(fa[counting].per100),
      differenceStandardError: round(se),
      delayMet: samplesOk && hoursOk,
      falseAlarmsMet: alarmsOk,
      met: samplesOk && hoursOk && alarmsOk,
      delayRatioSamples: round(d.medianSamples / f.medianSamples),
      delayRatioHours: round(d.medianHours / f.medianHours),
    };
  });
  const met = detectors.every((d) => d.met);
  const lines = detectors.map(
    (d) =>
      `target ×2 (${d.family}): median delay ${fmt(d.medianDelaySamples ?? Infinity)} samples / ${fmt(d.medianDelayHours ?? Infinity)} h vs fixed limit ` +
      `${fmt(d.fixedMedianDelaySamples ?? Infinity)} / ${fmt(d.fixedMedianDelayHours ?? Infinity)} h (ratio ${fmt(d.delayRatioSamples ?? Infinity)} / ${fmt(d.delayRatioHours ?? Infinity)}, needed ≤ 0.5), ` +
      `FA on the test fleet ${fmt(d.falseAlarmsTest ?? NaN)} vs ${fmt(d.fixedFalseAlarmsTest ?? NaN)} (difference SE ${fmt(d.differenceStandardError ?? NaN)}): ` +
      `${d.met ? 'MET' : `MISSED (${[!d.delayMet && 'delay', !d.falseAlarmsMet && 'false alarms'].filter(Boolean).join(' and ')})`}`,
  );
  return { met, detectors, lines };
}

/** Standard error, per 100 component-years, of the difference of two families' false alarms on the same components. */
function pairedStandardError(a: readonly number[], b: readonly number[], years: number): number {
  const d = a.map((x, i) => x - b[i]!);
  const m = d.reduce((s, x) => s + x, 0) / d.length;
  const variance = d.reduce((s, x) => s + (x - m) ** 2, 0) / (d.length - 1);
  return (100 * Math.sqrt(d.length * variance)) / years;
}
