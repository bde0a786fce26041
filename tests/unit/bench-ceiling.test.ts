/**
 * The detection ceiling of the `quiet` bench (bench/detectionCeiling.ts): the prediction-error decomposition it uses
 * must give the matched filter's dᵀΣ⁻¹d of the readings (Harvey 1989, "Forecasting, structural time series models and
 * the Kalman filter", the prediction error decomposition; from memory), here checked against Σ built and solved
 * directly; and its normal quantile against published table values.
 */
import { describe, expect, it } from 'vitest';
import { matchedSnrSquared, upperQuantile, type ModelStep } from '../../bench/detectionCeiling.ts';

/** dᵀΣ⁻¹d with Σ the covariance of the readings of the same model, by Cholesky. */
function direct(steps: readonly ModelStep[], priorVariance: number): number {
  const n = steps.length;
  const levelVariance: number[] = [];
  const mean: number[] = [];
  let v = priorVariance;
  let d = 0;
  for (const s of steps) {
    v = s.carry * s.carry * v + s.processVariance;
    d = s.carry * d + s.shift;
    levelVariance.push(v);
    mean.push(d);
  }
  const cov = Array.from({ length: n }, (_, j) =>
    Array.from({ length: n }, (_, k) => {
      const [a, b] = j <= k ? [j, k] : [k, j];
      let product = 1;
      for (let i = a + 1; i <= b; i++) product *= steps[i]!.carry;
      return product * levelVariance[a]! + (j === k ? steps[j]!.labVariance : 0);
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
      steps.push({ carry, processVariance: 0.8 + 0.05 * (k % 3), shift, labVariance: 1 + 0.01 * k * k });
    }
    for (const prior of [0, 2.5]) {
      const expected = direct(steps, prior);
      expect(expected).toBeGreaterThan(1);
      expect(matchedSnrSquared(steps, prior)).toBeCloseTo(expected, 8);
    }
  });

  it('no change, no signal; more lab noise, less signal', () => {
    const flat: ModelStep[] = Array.from({ length: 10 }, () => ({ carry: 1, processVariance: 1, shift: 0, labVariance: 1 }));
    expect(matchedSnrSquared(flat, 0)).toBe(0);
    const stepped = flat.map((s, k) => ({ ...s, shift: k >= 5 ? 1 : 0 }));
    const noisier = stepped.map((s) => ({ ...s, labVariance: 4 }));
    expect(matchedSnrSquared(noisier, 0)).toBeLessThan(matchedSnrSquared(stepped, 0));
  });

  it('upper normal quantiles match the published table (z 0.05 = 1.6449, 0.01 = 2.3263, 0.001 = 3.0902; common practice)', () => {
    expect(upperQuantile(0.05)).toBeCloseTo(1.6449, 4);
    expect(upperQuantile(0.01)).toBeCloseTo(2.3263, 4);
    expect(upperQuantile(0.001)).toBeCloseTo(3.0902, 4);
    expect(() => upperQuantile(0.7)).toThrow(RangeError);
  });
});
