/**
 * The run-length integral equation shared by CUSUM and EWMA, solved by the Nyström method on Gauss–Legendre nodes.
 *
 * Both charts move their statistic by a Gaussian autoregressive step, next = slope·current + drift + spread·ε with
 * ε ~ N(0, 1), and carry on while it stays inside a region; leaving it above signals. Below the region the statistic either
 * signals too (the two-sided EWMA) or is held at the lower bound (the CUSUM's reset to 0, or a barrier placed far enough
 * away that it stands for "no lower limit"). The run length L(u) from state u then solves
 *
 *   L(u) = 1 + L(lower)·P(next ≤ lower) [held only] + ∫_lower^upper L(y)·f(y | u) dy,
 *
 * with f the Gaussian step density. The kernel is smooth, so Gauss–Legendre quadrature converges exponentially in the
 * number of nodes (Vance 1986 for CUSUM; Crowder 1987 and Knoth 2005 for EWMA) and no Richardson extrapolation is needed.
 */
import { gaussLegendre, type QuadratureRule } from './gaussLegendre.ts';
import { normalCdf, normalDensity } from '../../domain/normal.ts';
import { solveLinear } from './solveLinear.ts';

export interface GaussianStep {
  readonly slope: number;
  readonly drift: number;
  readonly spread: number;
}

export interface ContinuationRegion {
  readonly lower: number;
  readonly upper: number;
  /** true: a step below `lower` is held at `lower`; false: it ends the run. */
  readonly holdAtLower: boolean;
}

/** The run length tabulated on a region: at its quadrature nodes and, when held, at its lower bound. */
export interface RunLengthTable {
  readonly region: ContinuationRegion;
  readonly rule: QuadratureRule;
  readonly atNodes: Float64Array;
  /** Run length from the holding point; 0 when the region does not hold (a step there has already signalled). */
  readonly atLower: number;
  /** Quadrature weight × run length at each node, the factor every later integral needs. */
  readonly weighted: Float64Array;
}

/**
 * Nodes enough for about nine significant digits: the step density must be resolved where it is narrow compared with the
 * region (the EWMA with a small λ), and the node count stays bounded so that one solve stays within a few tens of ms.
 */
export function nodeCount(region: ContinuationRegion, step: GaussianStep): number {
  const widthInSpreads = (region.upper - region.lower) / step.spread;
  return Math.min(400, Math.max(24, Math.ceil(12 + 3 * widthInSpreads)));
}

/** Beyond this many spreads from the step's mean the density is below 4e-17 of its peak and is left out of the sums. */
const NEGLIGIBLE_SPREADS = 8.7;
const INV_SQRT_2PI = 0.3989422804014327;

/** First index of the sorted `nodes` at or above `x`. */
function firstAtOrAbove(nodes: Float64Array, x: number): number {
  let lo = 0;
  let hi = nodes.length;
  while (lo < hi) {
    const mid = (lo + hi) >>> 1;
    if (nodes[mid]! < x) lo = mid + 1;
    else hi = mid;
  }
  return lo;
}

function makeTable(region: ContinuationRegion, rule: QuadratureRule, atNodes: Float64Array, atLower: number): RunLengthTable {
  return { region, rule, atNodes, atLower, weighted: atNodes.map((v, j) => v * rule.weights[j]!) };
}

/** 1 + E[L(next state)] from state `from`, with L known on the next step's region: the run length one step earlier. */
export function runLengthFrom(step: GaussianStep, next: RunLengthTable, from: number): number {
  const nodes = next.rule.nodes;
  const weighted = next.weighted;
  const mean = step.slope * from + step.drift;
  const scale = 1 / step.spread;
  const halfScale2 = -0.5 * scale * scale;
  let integral = 0;
  const end = nodes.length;
  const reach = NEGLIGIBLE_SPREADS * step.spread;
  for (let j = firstAtOrAbove(nodes, mean - reach); j < end; j++) {
    const d = nodes[j]! - mean;
    if (d > reach) break;
    integral += weighted[j]! * Math.exp(halfScale2 * d * d);
  }
  let sum = 1 + integral * scale * INV_SQRT_2PI;
  if (next.region.holdAtLower) sum += next.atLower * normalCdf((next.region.lower - mean) * scale);
  return sum;
}

/**
 * Run lengths past this many samples lose their digits in double precision (the systems' condition grows with the run length)
 * and mean "never" for any chart in service; they are reported as Infinity.
 */
export const LONGEST_RELIABLE_RUN_LENGTH = 1e9;

export function reliableRunLength(runLength: number): number {
  return runLength >= 1 && runLength <= LONGEST_RELIABLE_RUN_LENGTH ? runLength : Number.POSITIVE_INFINITY;
}

/** A target run length the ARL functions can meet reliably. */
export function checkTargetRunLength(arl0: number): void {
  if (!(arl0 > 1 && arl0 <= LONGEST_RELIABLE_RUN_LENGTH / 10)) {
    throw new RangeError(`the in-control run length must be more than 1 and at most ${LONGEST_RELIABLE_RUN_LENGTH / 10} samples, got ${arl0}`);
  }
}

/** Tabulates a known run-length function on a region: the backward step of a chart whose limits change from step to step. */
export function tabulateRunLength(region: ContinuationRegion, nodes: number, runLength: (state: number) => number): RunLengthTable {
  const rule = gaussLegendre(nodes, region.lower, region.upper);
  return makeTable(region, rule, rule.nodes.map(runLength), region.holdAtLower ? runLength(region.lower) : 0);
}

/** Solves the equation for a chart with fixed limits. */
export function solveRunLength(step: GaussianStep, region: ContinuationRegion, nodes = nodeCount(region, step)): RunLengthTable {
  const rule = gaussLegendre(nodes, region.lower, region.upper);
  const held = region.holdAtLower ? 1 : 0;
  const size = nodes + held;
  // Unknowns: L at the holding point (when held), then L at each node; row i is the equation at that state.
  const states = held ? [region.lower, ...rule.nodes] : [...rule.nodes];
  const a = new Float64Array(size * size);
  const b = new Float64Array(size).fill(1);
  for (let i = 0; i < size; i++) {
    const mean = step.slope * states[i]! + step.drift;
    a[i * size + i] = 1;
    if (held) a[i * size]! -= normalCdf((region.lower - mean) / step.spread);
    for (let j = 0; j < nodes; j++) {
      a[i * size + held + j]! -= (rule.weights[j]! / step.spread) * normalDensity((rule.nodes[j]! - mean) / step.spread);
    }
  }
  const solution = solveLinear(a, b);
  return makeTable(region, rule, solution.slice(held), held ? solution[0]! : 0);
}
