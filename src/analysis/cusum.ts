/**
 * Tabular CUSUM in standard-deviation units: z = (x − target)/sigma, C⁺ = max(0, C⁺ + z − k), C⁻ = max(0, C⁻ − z − k).
 * A sum signals when it exceeds h (strictly). The sums are not reset after a signal: what happens after one (a restart, an
 * incident) is the caller's decision. Run lengths for a design are in ./arl/cusumArl.ts.
 */

export interface CusumParams {
  /** Reference value in sigma: half the shift to be detected fastest. */
  readonly k: number;
  /** Decision interval in sigma. */
  readonly h: number;
  /** Fast-initial-response headstart as a fraction of h, 0 ≤ F < 1 (Lucas & Crosier 1982 suggest 0.5); default 0. */
  readonly headstart?: number;
}

export interface CusumState {
  readonly upper: number;
  readonly lower: number;
}

export type Signal = 'up' | 'down' | null;

export interface CusumPoint {
  index: number;
  value: number;
  upper: number;
  lower: number;
  signal: Signal;
}

export function checkCusumParams(p: CusumParams): void {
  if (!(Number.isFinite(p.k) && p.k >= 0)) throw new RangeError(`CUSUM k must be a number ≥ 0, got ${p.k}`);
  if (!(Number.isFinite(p.h) && p.h > 0)) throw new RangeError(`CUSUM h must be a number > 0, got ${p.h}`);
  const f = p.headstart ?? 0;
  if (!(f >= 0 && f < 1)) throw new RangeError(`CUSUM headstart must be a fraction of h in [0, 1), got ${f}`);
}

/** Both sums at headstart·h. */
export function cusumStart(p: CusumParams): CusumState {
  const s = (p.headstart ?? 0) * p.h;
  return { upper: s, lower: s };
}

export function cusumStep(s: CusumState, z: number, p: CusumParams): CusumState & { signal: Signal } {
  const upper = Math.max(0, s.upper + z - p.k);
  const lower = Math.max(0, s.lower - z - p.k);
  // Both sums cannot exceed h at once (their total only falls while both are positive), so one signal word suffices.
  const signal: Signal = upper > p.h ? 'up' : lower > p.h ? 'down' : null;
  return { upper, lower, signal };
}

/** Runs the chart over a series; points are numbered from 1. */
export function cusumChart(values: readonly number[], target: number, sigma: number, p: CusumParams): CusumPoint[] {
  checkCusumParams(p);
  if (!(Number.isFinite(sigma) && sigma > 0)) throw new RangeError(`sigma must be a number > 0, got ${sigma}`);
  if (!Number.isFinite(target)) throw new RangeError(`target must be a finite number, got ${target}`);
  let state: CusumState = cusumStart(p);
  return values.map((value, i) => {
    const next = cusumStep(state, (value - target) / sigma, p);
    state = next;
    return { index: i + 1, value, upper: next.upper, lower: next.lower, signal: next.signal };
  });
}
