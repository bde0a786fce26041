/**
 * The best any detector could do on a planned wear change of the `quiet` fleets: an upper bound on the chance that a
 * change is flagged within n samples, for a given false-alarm probability over those n samples.
 *
 * The bound is an oracle's. It knows much that the product has to learn or guess: the wear-process and lab variances of
 * the simulation (quietFleet.ts), the carry-over of every drain and top-up, the sample the change starts at and the
 * change's exact shape; one of the two oracles is told the component's true in-control rate as well. Under those assumptions the readings are Gaussian with a
 * known covariance, and "no change" against "this change" is a test of a known mean shift d: by the Neyman–Pearson
 * lemma the most powerful test at false-alarm probability α detects with probability Φ(√(dᵀΣ⁻¹d) − z₁₋α) (common
 * practice, any statistics text on the matched filter). dᵀΣ⁻¹d is computed by the prediction-error decomposition: a
 * Kalman filter of the true model turns the readings into independent innovations (variance S_k), the change's mean
 * shift into innovation means m_k, and dᵀΣ⁻¹d = Σ m_k²/S_k (Harvey, "Forecasting, structural time series models and
 * the Kalman filter", 1989, from memory; tests/unit/bench-ceiling.test.ts checks the identity against the direct
 * matrix computation). Censoring below the detection limit, the unknown variances and the unknown change time are
 * ignored, and the lab variance is the healthy twin's (a change raises the level and with it the lab noise), so a real
 * detector does worse, never better. The oracle that is not told the rate learns it from the
 * readings, before the change and after it (the rate is a state of its filter with an uninformative prior), as any
 * real detector must.
 *
 * α: a detector that keeps to the false-alarm budget raises, on a healthy metal, at most `window` × its per-sample
 * false-alarm rate over `window` samples. Two rates are reported: the whole change-detection budget of the component
 * spent on the one changed metal (the most generous), and the budget shared by the watched metals, as the product
 * shares it.
 */
import { normalCdf } from '../src/domain/normal.ts';
import { normalQuantile } from '../src/analysis/forecast/quantile.ts';
import type { FleetKind, SimulatedUnit, WearChange } from './quietFleet.ts';
import { LAB_NOISE, PROCESS_VARIANCE_PER_RATE } from './quietFleet.ts';

/**
 * One interval of the true model: carry-over of the level, operating hours, the wear process's variance, the extra
 * wear (ppm) the change adds, the lab variance of the reading.
 */
export interface ModelStep {
  readonly carry: number;
  readonly hours: number;
  readonly processVariance: number;
  readonly shift: number;
  readonly labVariance: number;
}

/** What the detector is granted before the first step. */
export interface Prior {
  /** Variance of the level (0: known). */
  readonly level: number;
  /**
   * Variance of the in-control rate, ppm²/h² (0: the rate is known). A large value leaves the rate to be learnt from
   * the readings, before the change and after it, as a detector that is not told the rate must.
   */
  readonly rate: number;
}

/**
 * Σ m_k²/S_k over the steps: the squared signal-to-noise ratio of the change for the optimal detector (module comment),
 * by a Kalman filter of level and rate (the rate constant, learnt as far as the prior leaves it unknown).
 */
export function matchedSnrSquared(steps: readonly ModelStep[], prior: Prior): number {
  // Covariance of (level, rate) after the last reading, and the mean of (true − filtered) under the change.
  let [pll, plr, prr] = [prior.level, 0, prior.rate];
  let [el, er] = [0, 0];
  let total = 0;
  for (const s of steps) {
    const { carry: c, hours: h } = s;
    // Predict: level' = c·level + h·rate, rate' = rate.
    const qll = c * c * pll + 2 * c * h * plr + h * h * prr + s.processVariance;
    const qlr = c * plr + h * prr;
    const qrr = prr;
    // Under the change the true level gains `shift` more than the model without it predicts.
    const ml = c * el + h * er + s.shift;
    const innovationVariance = qll + s.labVariance;
    total += (ml * ml) / innovationVariance;
    const [kl, kr] = [qll / innovationVariance, qlr / innovationVariance];
    [el, er] = [ml - kl * ml, er - kr * ml];
    [pll, plr, prr] = [qll - kl * qll, qlr - kl * qlr, qrr - kr * qlr];
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
    steps.push({ carry, hours: h, processVariance: PROCESS_VARIANCE_PER_RATE * base * h, shift: extra * base * h, labVariance: LAB_NOISE.absolute ** 2 + (LAB_NOISE.relative * level) ** 2 });
    previousHours = unit.hours[n]!;
  }
  return steps;
}

/**
 * Probability that the optimal detector flags `change` by sample `last` (index) with false-alarm probability `alpha`
 * over the window. `unit` is the clean twin (its true levels set the lab variance). With `rateKnown` false the detector
 * is not told the component's in-control rate: it learns it from the readings (a prior 100 times wider than the
 * rate itself, in effect none).
 */
export function ceilingProbability(unit: SimulatedUnit, kind: FleetKind, measurand: string, change: WearChange, last: number, alpha: number, rateKnown = true): number {
  const rate = unit.rates[measurand]!;
  const snr = Math.sqrt(matchedSnrSquared(modelSteps(unit, kind, measurand, change, last), { level: 0, rate: rateKnown ? 0 : (100 * rate) ** 2 }));
  // z₁₋α = −Φ⁻¹(α), exact in the far tail where 1 − α would round.
  return normalCdf(snr + normalQuantile(alpha));
}
