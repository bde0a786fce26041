/**
 * Average run length of the tabular CUSUM (src/analysis/cusum.ts) on standardised N(shift, 1) observations.
 *
 * One-sided: Page's integral equation for the upper sum, solved by the Nyström method (runLengthEquation.ts); this is the
 * continuous limit of the Brook & Evans (1972) Markov chain, without its discretisation error.
 *
 * Two-sided: the upper and lower sums move together, so the two one-sided run lengths do not simply combine once the chart
 * starts with a headstart. Both sums can be positive at once only while their total is falling by 2k per step, and a sum can
 * signal while the other is positive only from a state whose total exceeds h + 2k. From every other state one sum is at 0
 * when the other signals, which makes the Lucas & Crosier (1982) combination exact:
 *
 *   ARL(u, v) = [L⁺(u)·L⁻(0) + L⁻(v)·L⁺(0) − L⁺(0)·L⁻(0)] / [L⁺(0) + L⁻(0)]
 *
 * (for u = v = 0 this is 1/ARL = 1/L⁺ + 1/L⁻). A headstart above h/2 + k starts in a state whose total exceeds h + 2k; those
 * states lie on lines of constant total and are stepped through exactly, line by line, until the total falls to h + 2k.
 */
import { type GaussianStep, type RunLengthTable, nodeCount, reliableRunLength, runLengthFrom, solveRunLength, tabulateRunLength } from './runLengthEquation.ts';

export interface CusumArlOptions {
  readonly k: number;
  readonly h: number;
  /** Mean shift in standard deviations of one observation. */
  readonly shift: number;
  readonly sided: 'one' | 'two';
  /** Fast-initial-response headstart as a fraction of h, 0 ≤ F < 1; default 0 (zero state). */
  readonly headstart?: number;
}

/** At most this many lines of constant total are stepped through for a high two-sided headstart; a k that needs more is refused. */
const MAX_HEADSTART_LINES = 2000;

/** Run lengths beyond 1e9 samples are returned as Infinity (see reliableRunLength). */
export function cusumArl(o: CusumArlOptions): number {
  return reliableRunLength(computeCusumArl(o));
}

function computeCusumArl(o: CusumArlOptions): number {
  const { k, h, shift } = o;
  const fraction = o.headstart ?? 0;
  if (!(Number.isFinite(k) && k >= 0)) throw new RangeError(`CUSUM reference value k must be a number ≥ 0, got ${k}`);
  if (!(Number.isFinite(h) && h > 0)) throw new RangeError(`CUSUM decision interval h must be a number > 0, got ${h}`);
  if (!(fraction >= 0 && fraction < 1)) throw new RangeError(`CUSUM headstart must be a fraction of h in [0, 1), got ${fraction}`);
  if (!Number.isFinite(shift)) throw new RangeError(`shift must be a finite number, got ${shift}`);
  const start = fraction * h;
  const upStep = upperSumStep(k, shift);
  const up = solveUpperSum(upStep, h);
  if (o.sided === 'one') return oneSided(upStep, up, start);

  const downStep = upperSumStep(k, -shift);
  const down = solveUpperSum(downStep, h);
  const combined = (u: number, v: number): number =>
    (oneSided(upStep, up, u) * down.atLower + oneSided(downStep, down, v) * up.atLower - up.atLower * down.atLower) / (up.atLower + down.atLower);
  // Within rounding of the boundary the states past it carry no weight (the combination is continuous there).
  if (2 * start <= (h + 2 * k) * (1 + 1e-12)) return combined(start, start);
  return fromHighHeadstart(upStep, h, k, start, combined);
}

/** The upper sum's step u → u + x − k with x ~ N(shift, 1); the lower sum is the upper sum of −x. */
function upperSumStep(k: number, shift: number): GaussianStep {
  return { slope: 1, drift: shift - k, spread: 1 };
}

function solveUpperSum(step: GaussianStep, h: number): RunLengthTable {
  return solveRunLength(step, { lower: 0, upper: h, holdAtLower: true });
}

function oneSided(step: GaussianStep, table: RunLengthTable, start: number): number {
  return start === 0 ? table.atLower : runLengthFrom(step, table, start);
}

/**
 * Both sums start at s with 2s > h + 2k. While the total c = u + v exceeds h + 2k, a step either signals or keeps both sums
 * positive with total c − 2k (a sum cannot reach 0 without the other passing h), so the state is the upper sum u on the line
 * of total c, u ∈ [c − h, h]. The run length is tabulated on the first line at or below h + 2k by the exact combination and
 * stepped back line by line to the start.
 */
function fromHighHeadstart(step: GaussianStep, h: number, k: number, start: number, combined: (u: number, v: number) => number): number {
  if (k === 0) {
    // The total never falls: one line, one integral equation.
    const total = 2 * start;
    return runLengthFrom(step, solveRunLength(step, { lower: total - h, upper: h, holdAtLower: false }), start);
  }
  const lines = Math.ceil((2 * start - h - 2 * k) / (2 * k));
  if (lines > MAX_HEADSTART_LINES) {
    throw new RangeError(`a two-sided CUSUM headstart of ${start / h} with k = ${k} and h = ${h} needs k ≥ ${(2 * start - h) / (2 * (MAX_HEADSTART_LINES + 1))}, or a headstart ≤ h/2 + k`);
  }
  const lineRegion = (line: number) => ({ lower: 2 * start - 2 * k * line - h, upper: h, holdAtLower: false });
  const last = lineRegion(lines);
  let table = tabulateRunLength(last, nodeCount(last, step), (u) => combined(u, 2 * start - 2 * k * lines - u));
  for (let line = lines - 1; line >= 1; line--) {
    const region = lineRegion(line);
    const next = table;
    table = tabulateRunLength(region, nodeCount(region, step), (u) => runLengthFrom(step, next, u));
  }
  return runLengthFrom(step, table, start);
}
