/**
 * The in-control wear rate and its spread, learnt from stable history (after running-in) and pooled
 * across a group while a component's own history is short.
 *
 * Model, per interval i on one charge: increment_i = g·h_i + e_i with Var(e_i) = labVar_i + q·h_i, where g is
 * the wear rate (ppm/h), q the variance the wear process adds per hour and labVar_i the lab variance of both
 * readings. g is the ratio estimator Σincrement/Σhours (least squares for a variance growing with hours);
 * q comes from the residuals by the method of moments: Σ(increment − g·h)² = ΣlabVar + q·Σh.
 */
import type { BaselineSums, Interval, ProcessVariancePrior, RateBaseline } from './model.ts';

export const EMPTY_SUMS: BaselineSums = {
  intervals: 0,
  sumHours: 0,
  sumHoursSq: 0,
  sumIncrement: 0,
  sumIncrementSq: 0,
  sumIncrementHours: 0,
  sumLabVariance: 0,
};

export function addInterval(s: BaselineSums, i: Pick<Interval, 'hours' | 'increment'>, labVar: number): BaselineSums {
  return {
    intervals: s.intervals + 1,
    sumHours: s.sumHours + i.hours,
    sumHoursSq: s.sumHoursSq + i.hours ** 2,
    sumIncrement: s.sumIncrement + i.increment,
    sumIncrementSq: s.sumIncrementSq + i.increment ** 2,
    sumIncrementHours: s.sumIncrementHours + i.increment * i.hours,
    sumLabVariance: s.sumLabVariance + labVar,
  };
}

export function poolBaselines(all: Iterable<BaselineSums>): BaselineSums {
  let out = EMPTY_SUMS;
  for (const s of all) {
    out = {
      intervals: out.intervals + s.intervals,
      sumHours: out.sumHours + s.sumHours,
      sumHoursSq: out.sumHoursSq + s.sumHoursSq,
      sumIncrement: out.sumIncrement + s.sumIncrement,
      sumIncrementSq: out.sumIncrementSq + s.sumIncrementSq,
      sumIncrementHours: out.sumIncrementHours + s.sumIncrementHours,
      sumLabVariance: out.sumLabVariance + s.sumLabVariance,
    };
  }
  return out;
}

/**
 * Floors on the wear-process variance. Where lab noise dominates, a Kalman filter averages many past readings
 * and extrapolates them with the baseline rate; the error of a rate learnt from a short baseline then grows
 * into a bias of the prediction errors (amplified by 1/gain) and the false-alarm rate rises well above design.
 * So the filter is never allowed to trust its extrapolation much more than one fresh reading: over a typical
 * interval the process variance is at least half the variance of one reading (steady-state gain ≥ 0.5: the
 * local level model with q = R/2 gives P = R, gain P/(P + R)), and at least a tenth of the typical interval's wear
 * as one standard deviation. Where the true process is smoother, the floor makes the detectors conservative (fewer
 * false alarms than designed), never more alarm-prone.
 *
 * Why half a reading and not a whole one (the floor until December 2026): with a whole reading, healthy invented
 * fleets raised a third of the EWMA and CUSUM false alarms their part of the budget allows (the `quiet` benchmark:
 * 2.1 and 1.4 against 7.2 each per 100 component-years) while copper and aluminium, where lab noise dominates, were
 * learnt so fast that doublings were caught late; with half, 4.8 and 4.2, doublings caught a sample earlier
 * (BENCHMARKS.md, "The process-variance floor"). A quarter went past the design (EWMA 10.5). The price: where the
 * wear process rather than the lab dominates, a 12-interval own baseline leaves the CUSUM about 13 % more alarm-prone
 * than designed (the bench's design-check part; about 6 % with a whole reading).
 */
const PROCESS_SPREAD_FLOOR = 0.1;
/** The lab floor: the share of one reading's variance the wear process adds at least over a typical interval. */
const LAB_FLOOR_SHARE = 0.5;

export function rateBaseline(
  s: BaselineSums,
  components: number,
  typicalIntervalHours: number,
  options: { predictive?: boolean; prior?: ProcessVariancePrior } = {},
): RateBaseline | undefined {
  if (s.intervals === 0 || s.sumHours <= 0) return undefined;
  const rate = s.sumIncrement / s.sumHours;
  const rss = residualSquares(s, rate);
  const moment = options.predictive === true ? predictiveProcessVariance(s, rss, options.prior) : (rss - s.sumLabVariance) / s.sumHours;
  const wearFloor = (PROCESS_SPREAD_FLOOR * Math.abs(rate)) ** 2 * typicalIntervalHours;
  const readingVariance = s.sumLabVariance / (2 * s.intervals);
  const labFloor = (LAB_FLOOR_SHARE * readingVariance) / typicalIntervalHours;
  return { rate, processVariance: Math.max(moment, wearFloor, labFloor, 1e-9), intervals: s.intervals, components };
}

/**
 * The wear-process variance a filter should predict with when it is estimated from one component's few intervals.
 * Two corrections, both for the short sample:
 * - unbiased: fitting the rate takes up part of the residuals' process variance, E[rss] = ΣlabVar + q·(H − Σh²/H)
 *   (the lab noise of consecutive increments telescopes, so fitting the rate takes almost none of it);
 * - predictive: the estimate carries ν = intervals − 1 degrees of freedom; a prediction error standardised by it
 *   spreads like Student's t with ν degrees of freedom, variance ν/(ν − 2) times the estimate's. Without this a
 *   component whose variance happened to be estimated low has wider errors than its chart was designed for, and
 *   since a chart's false-alarm rate grows much faster than linearly with that width, such components spend far more
 *   of the false-alarm budget than those estimated high give back.
 * - moderated, when the component's group tells its units' wear-process variance (`prior`, withinProcessVariance):
 *   the two are weighed by their degrees of freedom, the group's counting as at most PRIOR_DEGREES intervals, and the
 *   prediction spreads like t with the degrees of both (the moderated variance of empirical Bayes, Smyth, "Linear
 *   models and empirical Bayes methods for assessing differential expression in microarray experiments", 2004, from
 *   memory). Twelve intervals where lab noise dominates tell the process variance to within about ±150 %: on the
 *   invented fleets, a unit whose variance came out three or four times too high hid a doubling of its wear rate for
 *   ten samples and more; where the group is not trusted yet, the own estimate stands alone, as before.
 */
function predictiveProcessVariance(s: BaselineSums, rss: number, prior?: ProcessVariancePrior): number {
  const effectiveHours = s.sumHours - s.sumHoursSq / s.sumHours;
  if (!(effectiveHours > 0)) return (rss - s.sumLabVariance) / s.sumHours;
  const unbiased = (rss - s.sumLabVariance) / effectiveHours;
  const own = s.intervals - 1;
  const weight = prior === undefined ? 0 : Math.min(prior.degrees, PRIOR_DEGREES);
  const nu = own + weight;
  const moderated = weight === 0 ? unbiased : (own * unbiased + weight * prior!.processVariance) / nu;
  return nu > 2 ? (moderated * nu) / (nu - 2) : moderated;
}

/** Σ(increment − rate·hours)² of a baseline's intervals about `rate`. */
function residualSquares(s: BaselineSums, rate: number): number {
  return s.sumIncrementSq - 2 * rate * s.sumIncrementHours + rate ** 2 * s.sumHoursSq;
}

/**
 * How many intervals of a unit's own the group's within-unit process variance counts as when a component's own
 * variance is moderated by it (predictiveProcessVariance): four 12-interval baselines' worth. Measured on the invented
 * fleets of the `quiet` benchmark part (BENCHMARKS.md, "A group's word on the wear-process variance"), at a third of
 * its size: 12 gained nothing, 48 caught ×1.5 steps within 15 samples in 80 % instead of 73 %, 150 and the group's
 * alone added false alarms. At full size 48 gave 63.5 % against 59.4 %.
 */
export const PRIOR_DEGREES = 48;

/**
 * The wear-process variance within the units of a group, from the pooled sums of their own baselines and the sum and
 * sum of squares of their own rates. The pooled residuals about the group's one rate hold the units' rate differences
 * too; those are taken out (each unit's (rᵢ − r)² times its share of Σh², taken as equal), leaving what the wear
 * process and the lab add within a unit. Undefined with fewer than 2 components.
 */
export function withinProcessVariance(pooled: BaselineSums, components: number, sumRate: number, sumRateSq: number): ProcessVariancePrior | undefined {
  if (components < 2 || !(pooled.sumHours > 0)) return undefined;
  const rate = pooled.sumIncrement / pooled.sumHours;
  const rss = residualSquares(pooled, rate);
  const between = Math.max(0, sumRateSq - 2 * rate * sumRate + components * rate ** 2) * (pooled.sumHoursSq / components);
  const effectiveHours = pooled.sumHours - (components * pooled.sumHoursSq) / pooled.sumHours;
  const degrees = pooled.intervals - components;
  if (!(effectiveHours > 0) || degrees < 1) return undefined;
  return { processVariance: Math.max(0, (rss - between - pooled.sumLabVariance) / effectiveHours), degrees };
}

/**
 * A group baseline from its components' own baseline sums: the pooled rate and process variance, and the
 * unit-to-unit spread of the rate (the variance of the components' own rates). Units of one design still wear at
 * different rates; judged against the group's mean rate a slow unit would look like a fall and a fast one like a
 * shift, so the spread travels with the baseline and the filter learns each component's own rate from it.
 */
export function groupBaseline(components: readonly BaselineSums[], typicalIntervalHours: number): RateBaseline | undefined {
  const usable = components.filter((c) => c.sumHours > 0);
  const pooled = rateBaseline(poolBaselines(usable), usable.length, typicalIntervalHours);
  if (pooled === undefined || usable.length < 2) return pooled;
  const rates = usable.map((c) => c.sumIncrement / c.sumHours);
  const mean = rates.reduce((a, b) => a + b, 0) / rates.length;
  const spread = rates.reduce((a, r) => a + (r - mean) ** 2, 0) / (rates.length - 1);
  const peers = peerRates(rates);
  return { ...pooled, rateVariance: spread, ...(peers && { peers }) };
}

/**
 * The spread of the components' own in-control rates on a log scale (wear rates of like-for-like units spread
 * roughly lognormally: a unit twice as fast is as unusual as one half as fast). Components whose learnt rate is
 * not above zero (lab noise on a clean unit) take no part.
 */
function peerRates(rates: readonly number[]): RateBaseline['peers'] {
  const logs = rates.filter((r) => r > 0).map(Math.log);
  if (logs.length < 2) return undefined;
  const meanLog = logs.reduce((a, b) => a + b, 0) / logs.length;
  const sdLog = Math.sqrt(logs.reduce((a, x) => a + (x - meanLog) ** 2, 0) / (logs.length - 1));
  return { components: logs.length, meanLogRate: meanLog, sdLogRate: sdLog };
}

/**
 * How many baselines' worth of data the filter weighs when it keeps learning a component's own rate: long enough
 * that a real shift shows for many samples before it is learnt, short enough that the rate learnt from the first
 * baseline stops being frozen with its estimation error.
 */
export const OWN_RATE_MEMORY = 4;

/**
 * A component's own baseline as the filter uses it: the rate learnt from its stable intervals, with that
 * estimate's own uncertainty (the variance of the ratio estimator), and a slow drift so that the filter keeps
 * refining the rate over a memory of OWN_RATE_MEMORY baselines instead of freezing the first estimate's error.
 * The wear-process variance is the predictive one (predictiveProcessVariance) from the baseline's intervals together
 * with `later`, the stable intervals after it (fold/changeTrack.ts: up to OWN_RATE_MEMORY baselines in all, none
 * while a change is signalled): 11 degrees of freedom leave one component in ten with a variance estimated at half
 * its value or less, and where the wear process rather than the lab dominates the prediction error, such a
 * component's errors are far wider than its charts were designed for.
 */
export function ownRateBaseline(s: BaselineSums, typicalIntervalHours: number, later?: BaselineSums, prior?: ProcessVariancePrior): RateBaseline | undefined {
  const options = { predictive: true, ...(prior && { prior }) };
  const own = rateBaseline(s, 1, typicalIntervalHours, options);
  if (own === undefined) return undefined;
  const spread = later !== undefined && later.intervals > 0 ? rateBaseline(poolBaselines([s, later]), 1, typicalIntervalHours, options) : undefined;
  const base = spread === undefined ? own : { ...own, processVariance: spread.processVariance };
  // Consecutive increments share a reading, so over a run of intervals the lab noise of the inner readings
  // cancels: what remains is the wear process over all the hours and the lab noise of the two end readings.
  const rateVariance = (base.processVariance * s.sumHours + s.sumLabVariance / s.intervals) / s.sumHours ** 2;
  const memory = OWN_RATE_MEMORY * s.intervals;
  return { ...base, rateVariance, rateDrift: (rateVariance * s.intervals) / (memory ** 2 * typicalIntervalHours) };
}
