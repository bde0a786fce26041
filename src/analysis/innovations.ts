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

interface FilterState {
  readonly level: number;
  readonly variance: number;
}

/** A level known from one reading: its uncertainty is the lab's. */
function settled(level: number, noise: Detection['labNoise']): FilterState {
  return { level, variance: labVariance(noise, level) };
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
  intervals.forEach((iv, index) => {
    const continuous = state !== undefined && iv.from !== undefined && iv.from.sampleId === previousTo;
    previousTo = iv.to.sampleId;
    const baseline = baselineAt(index);
    if (iv.runningIn || baseline === undefined) {
      state = iv.censored ? undefined : settled(iv.level, noise);
      return;
    }
    if (!continuous) {
      // The chain broke (first interval, a gap, a censored reading): start again from the interval's first reading.
      if (iv.censored) {
        state = undefined;
        return;
      }
      state = iv.carryOver === 0 ? { level: 0, variance: 0 } : settled(iv.baseLevel / iv.carryOver, noise);
    }
    const current = state as FilterState;
    const predicted = iv.carryOver * current.level + baseline.rate * iv.hours;
    const predictedVariance = iv.carryOver ** 2 * current.variance + baseline.processVariance * iv.hours;
    if (iv.censored) {
      // A censored reading tells too little to update on; time still passes.
      state = { level: predicted, variance: predictedVariance };
      return;
    }
    const errorVariance = predictedVariance + labVariance(noise, iv.level);
    const error = iv.level - predicted;
    const gain = predictedVariance / errorVariance;
    state = { level: predicted + gain * error, variance: (1 - gain) * predictedVariance };
    out.push({ interval: index, z: error / Math.sqrt(errorVariance), rate: iv.rate, baselineRate: baseline.rate });
  });
  return out;
}
