/**
 * Average run length of the EWMA chart (src/analysis/ewma.ts) on standardised N(shift, 1) observations, starting at the
 * target. The statistic steps z → (1 − λ)·z + λ·x and signals outside ±c, c = L·sqrt(λ/(2 − λ)) with steady-state limits.
 *
 * Steady-state limits: the integral equation of Crowder (1987), solved by the Nyström method (runLengthEquation.ts); this is
 * the continuous limit of the Lucas & Saccucci (1990) Markov chain and reproduces their tables.
 *
 * Exact (time-varying) limits c_i = L·sqrt(λ/(2 − λ)·(1 − (1 − λ)^(2i))): from the first step at which c_i is within 1e-9
 * of c the chart is the steady-state one; before that the run length is stepped back one sample at a time on each step's own
 * region, down to the start.
 *
 * One-sided (upper limit only) has no lower limit; its state space is cut off 6 steady-state standard deviations below
 * min(−c, shift), where the statistic is held instead. Reaching that barrier takes so long that moving it further changes the
 * run length by less than 1e-9 (relative) in the cases checked (λ from 0.03 to 1).
 */
import { ewmaLambdaIssue } from '../../domain/configBudget.ts';
import { type ContinuationRegion, type GaussianStep, type RunLengthTable, nodeCount, reliableRunLength, runLengthFrom, solveRunLength, tabulateRunLength } from './runLengthEquation.ts';

export interface EwmaArlOptions {
  readonly lambda: number;
  readonly L: number;
  /** Mean shift in standard deviations of one observation. */
  readonly shift: number;
  readonly sided: 'one' | 'two';
  /** Time-varying exact limits; default false: the steady-state limits of the published tables. */
  readonly exactLimits?: boolean;
}

const STEADY_TOLERANCE = 1e-9;
const BARRIER_DEPTH = 6;

/** Run lengths beyond 1e9 samples are returned as Infinity (see reliableRunLength). */
export function ewmaArl(o: EwmaArlOptions): number {
  return reliableRunLength(computeEwmaArl(o));
}

function computeEwmaArl(o: EwmaArlOptions): number {
  const { lambda, L, shift } = o;
  const lambdaIssue = ewmaLambdaIssue(lambda, 'the EWMA smoothing constant λ');
  if (lambdaIssue !== undefined) throw new RangeError(lambdaIssue);
  if (!(Number.isFinite(L) && L > 0)) throw new RangeError(`EWMA limit width L must be a number > 0, got ${L}`);
  if (!Number.isFinite(shift)) throw new RangeError(`shift must be a finite number, got ${shift}`);
  const steadySd = Math.sqrt(lambda / (2 - lambda));
  const limit = L * steadySd;
  const step: GaussianStep = { slope: 1 - lambda, drift: lambda * shift, spread: lambda };
  const barrier = Math.min(-limit, shift) - BARRIER_DEPTH * steadySd;
  const region = (c: number): ContinuationRegion => (o.sided === 'two' ? { lower: -c, upper: c, holdAtLower: false } : { lower: barrier, upper: c, holdAtLower: true });

  const steady = solveRunLength(step, region(limit));
  if (!o.exactLimits) return runLengthFrom(step, steady, 0);

  const limitAt = (i: number) => limit * Math.sqrt(1 - (1 - lambda) ** (2 * i));
  let steadyFrom = 1;
  while (limit - limitAt(steadyFrom) > STEADY_TOLERANCE) steadyFrom++;
  let table: RunLengthTable = steady;
  for (let i = steadyFrom; i >= 1; i--) {
    const r = region(limitAt(i));
    const next = table;
    table = tabulateRunLength(r, nodeCount(r, step), (z) => runLengthFrom(step, next, z));
  }
  return runLengthFrom(step, table, 0);
}
