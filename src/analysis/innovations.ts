/**
 * Standardised one-step prediction errors of a wear-metal level, the input of the EWMA and CUSUM detectors.
 *
 * The concentration on a charge follows a local level model: the level grows by g·h over h operating hours plus
 * a wear-process disturbance of variance q·h, make-up oil and drains scale the carried-over level by the
 * interval's carry-over share, and each reading adds lab noise. A Kalman filter predicts every reading from the
 * history before it; the prediction error divided by its standard deviation is N(0, 1) and independent from
 * sample to sample while the wear rate stays at g (in control). Plain standardised increments
 * (Δc − g·Δh)/sd are the special case without lab noise; with lab noise, consecutive increments share a reading
 * and are negatively correlated, which would make run-length designs for independent data wrong.
 * A shift of the wear rate to g + δ gives prediction errors with a positive mean (δ·h at first, growing to
 * δ·h/K as the filter settles, K being its gain), which the detectors accumulate.
 *
 * The component's rate is a state of the filter too. Against a group baseline (while the own history is short)
 * it starts from the group's rate with the unit-to-unit spread as its variance and is learnt from the readings,
 * so the errors stay N(0, 1) for a unit whose rate is anywhere in the group's spread. Once the own baseline is
 * complete it restarts from the own estimate with that estimate's uncertainty and a slow drift, so the filter
 * keeps refining it over a long memory: a real shift shows for many samples before it is learnt, while the first
 * estimate's error does not stay frozen into a standing bias.
 */
import type { Detection } from '../domain/config.ts';
import { labVariance } from './labNoise.ts';
import type { Interval, RateBaseline } from './model.ts';

export interface Innovation {
  /** Index of the interval (into the measurand's intervals). */
  readonly interval: number;
  readonly z: number;
  /** The rate the interval showed and the in-control rate it was judged against, in ppm/h. */
  readonly rate: number;
  readonly baselineRate: number;
}

/** Level and rate with their covariance: variance (level), covariance (level, rate), rateVariance. */
interface FilterState {
  readonly level: number;
  readonly variance: number;
  readonly rate: number;
  readonly covariance: number;
  readonly rateVariance: number;
}

/** A level known from one reading (its uncertainty is the lab's), the rate as the baseline gives it. */
function settled(level: number, noise: Detection['labNoise'], baseline: RateBaseline | undefined): FilterState {
  return { level, variance: labVariance(noise, level), ...baselineRate(baseline) };
}

function baselineRate(b: RateBaseline | undefined): Pick<FilterState, 'rate' | 'covariance' | 'rateVariance'> {
  return { rate: b?.rate ?? 0, covariance: 0, rateVariance: b?.rateVariance ?? 0 };
}

/**
 * @param baselineAt the baseline in force for the interval at that index, or undefined while none is known
 *   (running-in, own history too short and no group baseline): the filter then restarts at the next reading.
 */
export function innovations(
  intervals: readonly Interval[],
  noise: Detection['labNoise'],
  baselineAt: (index: number) => RateBaseline | undefined,
): Innovation[] {
  const out: Innovation[] = [];
  let state: FilterState | undefined;
  let previousTo: string | undefined;
  let previousBaseline: RateBaseline | undefined;
  intervals.forEach((iv, index) => {
    const continuous = state !== undefined && iv.from !== undefined && iv.from.sampleId === previousTo;
    previousTo = iv.to.sampleId;
    const baseline = baselineAt(index);
    const switched = baseline !== previousBaseline;
    previousBaseline = baseline;
    if (iv.runningIn || baseline === undefined) {
      state = iv.censored ? undefined : settled(iv.level, noise, baseline);
      return;
    }
    if (!continuous || state === undefined) {
      // The chain broke (first interval, a gap, a censored reading): start again from the interval's first reading.
      if (iv.censored) {
        state = undefined;
        return;
      }
      const from = iv.carryOver === 0 ? { level: 0, variance: 0 } : settled(iv.baseLevel / iv.carryOver, noise, baseline);
      state = { ...from, ...baselineRate(baseline) };
    } else if (switched) {
      // A new baseline (the own one completed): its rate replaces what the filter had learnt.
      state = { ...state, ...baselineRate(baseline) };
    }
    const s = state;
    const c = iv.carryOver;
    const h = iv.hours;
    const rateVariance = s.rateVariance + (baseline.rateDrift ?? 0) * h;
    const predicted = c * s.level + h * s.rate;
    const predictedVariance = c * c * s.variance + 2 * c * h * s.covariance + h * h * rateVariance + baseline.processVariance * h;
    const predictedCovariance = c * s.covariance + h * rateVariance;
    if (iv.censored) {
      // A censored reading tells too little to update on; time still passes.
      state = { ...s, level: predicted, variance: predictedVariance, covariance: predictedCovariance, rateVariance };
      return;
    }
    const errorVariance = predictedVariance + labVariance(noise, iv.level);
    const error = iv.level - predicted;
    state = {
      level: predicted + (predictedVariance / errorVariance) * error,
      variance: predictedVariance - predictedVariance ** 2 / errorVariance,
      rate: s.rate + (predictedCovariance / errorVariance) * error,
      covariance: predictedCovariance - (predictedVariance * predictedCovariance) / errorVariance,
      rateVariance: rateVariance - predictedCovariance ** 2 / errorVariance,
    };
    out.push({ interval: index, z: error / Math.sqrt(errorVariance), rate: iv.rate, baselineRate: s.rate });
  });
  return out;
}
