/**
 * EWMA chart: w_i = λ·x_i + (1 − λ)·w_{i−1}, starting at the target, with limits target ± L·sigma·factor_i. The exact
 * (time-varying) factor sqrt(λ/(2 − λ)·(1 − (1 − λ)^(2i))) is the standard deviation of w_i and keeps the false-alarm risk
 * of the first points equal to that of later ones; the steady-state factor sqrt(λ/(2 − λ)) is what the published ARL
 * tables assume. Signals when w leaves the limits (strictly); no reset. Run lengths for a design are in ./arl/ewmaArl.ts.
 */
import type { Signal } from './cusum.ts';

export interface EwmaParams {
  /** Smoothing constant, 0 < λ ≤ 1. */
  readonly lambda: number;
  /** Limit width in standard deviations of the EWMA statistic. */
  readonly L: number;
  /** default true: time-varying exact limits */
  readonly exactLimits?: boolean;
}

export interface EwmaPoint {
  index: number;
  value: number;
  ewma: number;
  ucl: number;
  lcl: number;
  signal: Signal;
}

export function checkEwmaParams(p: EwmaParams): void {
  if (!(p.lambda > 0 && p.lambda <= 1)) throw new RangeError(`EWMA lambda must be in (0, 1], got ${p.lambda}`);
  if (!(Number.isFinite(p.L) && p.L > 0)) throw new RangeError(`EWMA L must be a number > 0, got ${p.L}`);
}

/** Standard deviation of the EWMA after point i (from 1), in units of one observation's sigma. */
export function ewmaLimitFactor(lambda: number, i: number, exact: boolean): number {
  const steady = lambda / (2 - lambda);
  return Math.sqrt(exact ? steady * (1 - (1 - lambda) ** (2 * i)) : steady);
}

/** Runs the chart over a series; points are numbered from 1. */
export function ewmaChart(values: readonly number[], target: number, sigma: number, p: EwmaParams): EwmaPoint[] {
  checkEwmaParams(p);
  if (!(Number.isFinite(sigma) && sigma > 0)) throw new RangeError(`sigma must be a number > 0, got ${sigma}`);
  if (!Number.isFinite(target)) throw new RangeError(`target must be a finite number, got ${target}`);
  const exact = p.exactLimits ?? true;
  let ewma = target;
  return values.map((value, i) => {
    ewma = p.lambda * value + (1 - p.lambda) * ewma;
    const halfWidth = p.L * sigma * ewmaLimitFactor(p.lambda, i + 1, exact);
    const ucl = target + halfWidth;
    const lcl = target - halfWidth;
    const signal: Signal = ewma > ucl ? 'up' : ewma < lcl ? 'down' : null;
    return { index: i + 1, value, ewma, ucl, lcl, signal };
  });
}
