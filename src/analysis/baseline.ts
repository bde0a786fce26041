/**
 * The in-control wear rate and its spread, learnt from stable history (after running-in) and pooled
 * across a group while a component's own history is short.
 *
 * Model, per interval i on one charge: increment_i = g·h_i + e_i with Var(e_i) = labVar_i + q·h_i, where g is
 * the wear rate (ppm/h), q the variance the wear process adds per hour and labVar_i the lab variance of both
 * readings. g is the ratio estimator Σincrement/Σhours (least squares for a variance growing with hours);
 * q comes from the residuals by the method of moments: Σ(increment − g·h)² = ΣlabVar + q·Σh.
 */
import type { BaselineSums, Interval, RateBaseline } from './model.ts';

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

export function rateBaseline(s: BaselineSums, components: number, typicalIntervalHours: number, options: { predictive?: boolean } = {}): RateBaseline | undefined {
  if (s.intervals === 0 || s.sumHours <= 0) return undefined;
  const rate = s.sumIncrement / s.sumHours;
  const rss = s.sumIncrementSq - 2 * rate * s.sumIncrementHours + rate ** 2 * s.sumHoursSq;
  const moment = options.predictive === true ? predictiveProcessVariance(s, rss) : (rss - s.sumLabVariance) / s.sumHours;
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
 */
function predictiveProcessVariance(s: BaselineSums, rss: number): number {
  const effectiveHours = s.sumHours - s.sumHoursSq / s.sumHours;
  if (!(effectiveHours > 0)) return (rss - s.sumLabVariance) / s.sumHours;
  const unbiased = (rss - s.sumLabVariance) / effectiveHours;
  const nu = s.intervals - 1;
  return nu > 2 ? (unbiased * nu) / (nu - 2) : unbiased;
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
export function ownRateBaseline(s: BaselineSums, typicalIntervalHours: number, later?: BaselineSums): RateBaseline | undefined {
  const own = rateBaseline(s, 1, typicalIntervalHours, { predictive: true });
  if (own === undefined) return undefined;
  const spread = later !== undefined && later.intervals > 0 ? rateBaseline(poolBaselines([s, later]), 1, typicalIntervalHours, { predictive: true }) : undefined;
  const base = spread === undefined ? own : { ...own, processVariance: spread.processVariance };
  // Consecutive increments share a reading, so over a run of intervals the lab noise of the inner readings
  // cancels: what remains is the wear process over all the hours and the lab noise of the two end readings.
  const rateVariance = (base.processVariance * s.sumHours + s.sumLabVariance / s.intervals) / s.sumHours ** 2;
  const memory = OWN_RATE_MEMORY * s.intervals;
  return { ...base, rateVariance, rateDrift: (rateVariance * s.intervals) / (memory ** 2 * typicalIntervalHours) };
}
