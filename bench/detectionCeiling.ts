/**
 * The best any detector could do on a planned wear change of the `quiet` fleets: an upper bound on the chance that a
 * change is flagged within n samples, for a given false-alarm probability over those n samples.
 *
 * The bound is an oracle's. It knows everything the product has to learn or guess: the component's true in-control rate,
 * the wear-process and lab variances of the simulation (quietFleet.ts), the carry-over of every drain and top-up, the
 * sample the change starts at and the change's exact shape. Under those assumptions the readings are Gaussian with a
 * known covariance, and "no change" against "this change" is a test of a known mean shift d: by the Neyman–Pearson
 * lemma the most powerful test at false-alarm probability α detects with probability Φ(√(dᵀΣ⁻¹d) − z₁₋α) (common
 * practice, any statistics text on the matched filter). dᵀΣ⁻¹d is computed by the prediction-error decomposition: a
 * Kalman filter of the true model turns the readings into independent innovations (variance S_k), the change's mean
 * shift into innovation means m_k, and dᵀΣ⁻¹d = Σ m_k²/S_k (Harvey, "Forecasting, structural time series models and
 * the Kalman filter", 1989, from memory; tests/unit/bench-ceiling.test.ts checks the identity against the direct
 * matrix computation). Censoring below the detection limit and the unknown rate, variances and change time are ignored,
 * so a real detector does worse, never better.
 *
 * α: a detector that keeps to the false-alarm budget raises, on a healthy metal, at most `window` × its per-sample
 * false-alarm rate over `window` samples. Two rates are reported: the whole change-detection budget of the component
 * spent on the one changed metal (the most generous), and the budget shared by the watched metals, as the product
 * shares it.
 */
import { normalCdf } from '../src/analysis/arl/normal.ts';
import type { FleetKind, SimulatedUnit, WearChange } from './quietFleet.ts';
import { LAB_NOISE, PROCESS_VARIANCE_PER_RATE } from './quietFleet.ts';

/** Upper quantile of the standard normal: z with 1 − Φ(z) = p (bisection; p in (0, 0.5]). */
export function upperQuantile(p: number): number {
  if (!(p > 0 && p <= 0.5)) throw new RangeError(`tail probability must be in (0, 0.5], got ${p}`);
  let lo = 0;
  let hi = 40;
  for (let i = 0; i < 200; i++) {
    const mid = (lo + hi) / 2;
    if (1 - normalCdf(mid) > p) lo = mid;
    else hi = mid;
  }
  return (lo + hi) / 2;
}

/** One interval of the true model: carry-over of the level, hours, extra wear (ppm) the change adds, lab variance of the reading. */
export interface ModelStep {
  readonly carry: number;
  readonly processVariance: number;
  readonly shift: number;
  readonly labVariance: number;
}

/**
 * Σ m_k²/S_k over the steps: the squared signal-to-noise ratio of the change for the optimal detector (module comment).
 * `priorVariance` is the variance of the level before the first step.
 */
export function matchedSnrSquared(steps: readonly ModelStep[], priorVariance: number): number {
  let p = priorVariance; // variance of the filtered level
  let mean = 0; // mean of (true level − filtered level) under the change
  let total = 0;
  for (const s of steps) {
    const predictedVariance = s.carry * s.carry * p + s.processVariance;
    // Under the change the true level gains `shift` more than the model without it predicts.
    const m = s.carry * mean + s.shift;
    const innovationVariance = predictedVariance + s.labVariance;
    total += (m * m) / innovationVariance;
    const gain = predictedVariance / innovationVariance;
    mean = m - gain * m;
    p = predictedVariance - gain * predictedVariance;
  }
  return total;
}

/**
 * The true model's steps of one component's metal up to sample `last` (index), with the extra wear `change` adds to the
 * changed unit (zero before it starts).
 */
export function modelSteps(unit: SimulatedUnit, kind: FleetKind, measurand: string, change: WearChange, last: number): ModelStep[] {
  const base = unit.rates[measurand]!;
  const steps: ModelStep[] = [];
  let previousHours = 0;
  for (let n = 0; n <= last && n < unit.events.length; n++) {
    const e = unit.events[n]!;
    const h = unit.hours[n]! - previousHours;
    const carry = n === 0 ? 0 : e.oilChanged ? kind.residualFraction : 1 - Math.min(1, (e.topUpLitres ?? 0) / kind.sumpLitres);
    const mid = previousHours + h / 2;
    const extra = mid < change.atHours ? 0 : change.shape === 'step' ? change.factor - 1 : (change.factor - 1) * Math.min(1, (mid - change.atHours) / (change.rampHours ?? 1));
    const level = unit.trueLevels[n]![measurand]!;
    steps.push({ carry, processVariance: PROCESS_VARIANCE_PER_RATE * base * h, shift: extra * base * h, labVariance: LAB_NOISE.absolute ** 2 + (LAB_NOISE.relative * level) ** 2 });
    previousHours = unit.hours[n]!;
  }
  return steps;
}

/**
 * Probability that the optimal detector flags `change` by sample `last` (index) with false-alarm probability `alpha`
 * over the window. `unit` is the clean twin (its true levels set the lab variance).
 */
export function ceilingProbability(unit: SimulatedUnit, kind: FleetKind, measurand: string, change: WearChange, last: number, alpha: number): number {
  const snr = Math.sqrt(matchedSnrSquared(modelSteps(unit, kind, measurand, change, last), 0));
  return normalCdf(snr - upperQuantile(alpha));
}
