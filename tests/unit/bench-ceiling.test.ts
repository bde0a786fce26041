/**
 * The detection ceiling of the `quiet` bench (bench/detectionCeiling.ts): the prediction-error decomposition it uses
 * must give the matched filter's dᵀΣ⁻¹d of the readings (Harvey 1989, "Forecasting, structural time series models and
 * the Kalman filter", the prediction error decomposition; from memory), here checked against Σ built and solved
 * directly.
 */
import { describe, expect, it } from 'vitest';
import { matchedSnrSquared, type ModelStep, type Prior } from '../../bench/detectionCeiling.ts';

/**
 * dᵀΣ⁻¹d with Σ the covariance of the readings of the same model, by Cholesky: the level's prior and the wear process
 * carried forward, the rate's prior through each reading's exposure to the rate (x_k = c_k·x_{k−1} + h_k), lab noise.
 */
function direct(steps: readonly ModelStep[], prior: Prior): number {
  const n = steps.length;
  const levelVariance: number[] = [];
  const mean: number[] = [];
  const exposure: number[] = [];
  let v = prior.level;
  let d = 0;
  let x = 0;
  for (const s of steps) {
    v = s.carry * s.carry * v + s.processVariance;
    d = s.carry * d + s.shift;
    x = s.carry * x + s.hours;
    levelVariance.push(v);
    mean.push(d);
    exposure.push(x);
  }
  const cov = Array.from({ length: n }, (_, j) =>
    Array.from({ length: n }, (_, k) => {
      const [a, b] = j <= k ? [j, k] : [k, j];
      let product = 1;
      for (let i = a + 1; i <= b; i++) product *= steps[i]!.carry;
      return product * levelVariance[a]! + prior.rate * exposure[j]! * exposure[k]! + (j === k ? steps[j]!.labVariance : 0);
    }),
  );
  const L = Array.from({ length: n }, () => new Array<number>(n).fill(0));
  for (let i = 0; i < n; i++) {
    for (let j = 0; j <= i; j++) {
      let sum = cov[i]![j]!;
      for (let k = 0; k < j; k++) sum -= L[i]![k]! * L[j]![k]!;
      L[i]![j] = i === j ? Math.sqrt(sum) : sum / L[j]![j]!;
    }
  }
  // Solve L y = d; dᵀΣ⁻¹d = yᵀy.
  const y: number[] = [];
  for (let i = 0; i < n; i++) {
    let sum = mean[i]!;
    for (let k = 0; k < i; k++) sum -= L[i]![k]! * y[k]!;
    y.push(sum / L[i]![i]!);
  }
  return y.reduce((a, x) => a + x * x, 0);
}

describe('detection ceiling', () => {
  it('the innovations give dᵀΣ⁻¹d of the readings: drains, top-ups, a step and a ramp', () => {
    const steps: ModelStep[] = [];
    for (let k = 0; k < 24; k++) {
      const carry = k === 0 ? 0 : k % 8 === 0 ? 0.15 : 0.99;
      const shift = k < 10 ? 0 : k < 14 ? 0.5 * (k - 9) : 2;
      steps.push({ carry, hours: 200 + 10 * (k % 5), processVariance: 0.8 + 0.05 * (k % 3), shift, labVariance: 1 + 0.01 * k * k });
    }
    for (const prior of [{ level: 0, rate: 0 }, { level: 2.5, rate: 0 }, { level: 1, rate: 1e-4 }]) {
      const expected = direct(steps, prior);
      expect(expected).toBeGreaterThan(1);
      expect(matchedSnrSquared(steps, prior)).toBeCloseTo(expected, 6);
    }
    // A detector that must learn the rate sees less of the change than one that is told it.
    expect(matchedSnrSquared(steps, { level: 0, rate: 1e-4 })).toBeLessThan(matchedSnrSquared(steps, { level: 0, rate: 0 }));
  });

  it('no change, no signal; more lab noise, less signal', () => {
    const known = { level: 0, rate: 0 };
    const flat: ModelStep[] = Array.from({ length: 10 }, () => ({ carry: 1, hours: 250, processVariance: 1, shift: 0, labVariance: 1 }));
    expect(matchedSnrSquared(flat, known)).toBe(0);
    const stepped = flat.map((s, k) => ({ ...s, shift: k >= 5 ? 1 : 0 }));
    const noisier = stepped.map((s) => ({ ...s, labVariance: 4 }));
    expect(matchedSnrSquared(noisier, known)).toBeLessThan(matchedSnrSquared(stepped, known));
  });
});
