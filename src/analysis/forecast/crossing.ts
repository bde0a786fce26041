/**
 * When a projected trend crosses a level, with its uncertainty.
 *
 * The level x(τ) τ operating hours after the last reading follows dx/dτ = g + κ·(m − x): the wear rate g, and
 * make-up oil at κ sump volumes per hour that brings the make-up oil's own level m (0 for a wear metal; the new-oil
 * value for an oil property). With a = e^(−κτ) and b = (1 − a)/κ (b = τ without make-up oil):
 *
 *   E x(τ)   = a·x₀ + b·g + (1 − a)·m
 *   Var x(τ) = a²·Var x₀ + 2ab·Cov(x₀, g) + b²·Var g + q·(1 − a²)/(2κ)      (q·τ without make-up oil)
 *
 * where (x₀, g) and their covariance are what the filter (or the fit) knows now and q is the wear process's own
 * variance per hour; a rate that may wander (the filter's rate drift d per hour) adds d·τ³/3. A rate that changes
 * steadily by c per hour (the recent trend, fitted with Var c and Cov(g, c)) adds e·c to the mean and
 * e²·Var c + 2b·e·Cov(g, c) to the variance, e = (τ − b)/κ (τ²/2 without make-up oil).
 *
 * The crossing time T of a rising level L is the first τ with x(τ) ≥ L, so
 * P(T ≤ τ) = P(x(τ) ≥ L) = F((E x(τ) − L)/sd x(τ)) for a location-scale F (normal for a known variance, Student's t
 * for a fitted line). The p-quantile of T is the first τ where (E x(τ) − L)/sd x(τ) ≥ F⁻¹(p): found on a grid over
 * the horizon, then within the grid step by regula falsi with the Illinois modification, safeguarded by bisection
 * (firstReached). For a falling quantity the signs turn round. Where the level depends on the oil hours (a population
 * limit by band), L(τ) is read at each τ. For several normal trends weighed together (a mixture)
 * P(T ≤ τ) = Σ w_k·Φ((E_k x(τ) − L)/sd_k x(τ)), and the p-quantile is the first τ where that reaches p, found the
 * same way.
 */

import { normalCdf } from '../../domain/normal.ts';
import { normalQuantile as normalQuantileOf } from './quantile.ts';

export interface ProjectedTrend {
  readonly level: number;
  readonly rate: number;
  readonly levelVariance: number;
  readonly covariance: number;
  readonly rateVariance: number;
  /** Wear-process variance per hour (0 for a fitted line: its residual spread is in the fit's variances). */
  readonly processVariance: number;
  /** Make-up oil in sump volumes per operating hour (κ). */
  readonly dilution: number;
  /** The level the make-up oil brings (m). */
  readonly makeUpLevel: number;
  /** How fast the rate may wander, (rate unit)² per hour: a random walk of the rate adds drift·τ³/3 to Var x(τ). */
  readonly rateDrift?: number;
  /** A rate that changes steadily: its change per hour (c), with its variance and its covariance with the rate. */
  readonly acceleration?: { readonly value: number; readonly variance: number; readonly rateCovariance: number };
}

export interface Projection {
  readonly mean: number;
  readonly sd: number;
}

const TINY_DILUTION = 1e-9;

export function projectAt(t: ProjectedTrend, tau: number): Projection {
  const k = t.dilution;
  const a = k > TINY_DILUTION ? Math.exp(-k * tau) : 1;
  const b = k > TINY_DILUTION ? (1 - a) / k : tau;
  const process = k > TINY_DILUTION ? (1 - a * a) / (2 * k) : tau;
  // A rate changing by c per hour adds c·∫₀^τ e^(−κ(τ−s))·s ds = c·(τ − b)/κ (c·τ²/2 without make-up oil).
  const e = k > TINY_DILUTION ? (tau - b) / k : (tau * tau) / 2;
  const c = t.acceleration;
  const mean = a * t.level + b * t.rate + (1 - a) * t.makeUpLevel + (c === undefined ? 0 : e * c.value);
  const drift = t.rateDrift ?? 0;
  const variance =
    a * a * t.levelVariance +
    2 * a * b * t.covariance +
    b * b * t.rateVariance +
    t.processVariance * process +
    (drift * tau ** 3) / 3 +
    (c === undefined ? 0 : e * e * c.variance + 2 * b * e * c.rateCovariance);
  return { mean, sd: Math.sqrt(Math.max(0, variance)) };
}

/** The trend as it stands τ hours on: the level's mean and variance, its covariance with the rate. */
export function trendAt(t: ProjectedTrend, tau: number): ProjectedTrend {
  const k = t.dilution;
  const a = k > TINY_DILUTION ? Math.exp(-k * tau) : 1;
  const b = k > TINY_DILUTION ? (1 - a) / k : tau;
  const p = projectAt(t, tau);
  const drift = t.rateDrift ?? 0;
  const c = t.acceleration;
  const e = k > TINY_DILUTION ? (tau - b) / k : (tau * tau) / 2;
  return {
    ...t,
    level: p.mean,
    levelVariance: p.sd ** 2,
    covariance: a * t.covariance + b * t.rateVariance + (drift * tau * tau) / 2 + (c === undefined ? 0 : (e + tau * b) * c.rateCovariance + tau * e * c.variance),
    rate: t.rate + (c === undefined ? 0 : tau * c.value),
    rateVariance: t.rateVariance + drift * tau + (c === undefined ? 0 : tau * tau * c.variance + 2 * tau * c.rateCovariance),
    ...(c !== undefined && { acceleration: { ...c, rateCovariance: c.rateCovariance + tau * c.variance } }),
  };
}

export interface CrossingQuery {
  /** The level at τ hours on; undefined where there is none (a population band without enough results). */
  readonly levelAt: (tau: number) => number | undefined;
  readonly side: 'above' | 'below';
  /** Search [from, horizon] hours (from: default 0; a later quantile need not look before an earlier one). */
  readonly horizon: number;
  readonly from?: number;
  /** F⁻¹ of the quantile wanted (0 for the median). */
  readonly z: number;
}

/** Grid points over the horizon; the root search then refines within one step. */
const GRID = 120;
/** The root search stops once the bracket is this narrow (hours), or this share of τ when that is wider. */
const TOLERANCE_HOURS = 1e-8;
const TOLERANCE_RELATIVE = 1e-13;
/** Steps of the root search at most (bisection alone would narrow a grid step by 2⁻⁶⁰). */
const MAX_STEPS = 60;

/**
 * The first τ in (lo, hi] at which `f(τ) ≥ 0`, where f(lo) < 0 ≤ f(hi) (f may be −∞ where no level applies): regula falsi
 * with the Illinois modification, each estimate kept at least half the tolerance inside the bracket, and a bisection
 * whenever three steps have not halved it or an estimate cannot be made (an infinite f). Returns the bracket's upper
 * end, where f ≥ 0, once the bracket is narrower than the tolerance: the point bisection gives, in 6–10 evaluations
 * for a smooth f where bisection took 40 (a step in f, a population band's edge, is found by the bisections).
 */
export function firstReached(f: (tau: number) => number, lo: number, flo: number, hi: number, fhi: number): number {
  const tolerance = Math.max(TOLERANCE_HOURS, TOLERANCE_RELATIVE * Math.abs(hi));
  let kept: 'lo' | 'hi' | undefined;
  let widthBefore = hi - lo;
  for (let step = 0; step < MAX_STEPS && hi - lo > tolerance; step++) {
    const bisect = step % 3 === 2 && hi - lo > widthBefore / 2;
    if (step % 3 === 2) widthBefore = hi - lo;
    let x = !bisect && Number.isFinite(flo) && Number.isFinite(fhi) && fhi > flo ? hi - (fhi * (hi - lo)) / (fhi - flo) : (lo + hi) / 2;
    x = Math.min(Math.max(x, lo + tolerance / 2), hi - tolerance / 2);
    const fx = f(x);
    if (fx >= 0) {
      hi = x;
      fhi = fx;
      if (kept === 'lo') flo /= 2;
      kept = 'lo';
    } else {
      lo = x;
      flo = fx;
      if (kept === 'hi') fhi /= 2;
      kept = 'hi';
    }
  }
  return hi;
}

/** The first τ in [0, horizon] at which the crossing has happened with the wanted probability; undefined: not within the horizon. */
export function crossingQuantile(t: ProjectedTrend, q: CrossingQuery): number | undefined {
  const margin = (tau: number): number => {
    const level = q.levelAt(tau);
    if (level === undefined) return -Infinity;
    const p = projectAt(t, tau);
    const beyond = q.side === 'above' ? p.mean - level : level - p.mean;
    return beyond - q.z * p.sd;
  };
  const from = Math.max(0, q.from ?? 0);
  let previous = from;
  let mPrevious = margin(from);
  if (mPrevious >= 0) return from;
  if (!(q.horizon > from)) return undefined;
  for (let i = 1; i <= GRID; i++) {
    const tau = from + ((q.horizon - from) * i) / GRID;
    const m = margin(tau);
    if (m >= 0) return firstReached(margin, previous, mPrevious, tau, m);
    previous = tau;
    mPrevious = m;
  }
  return undefined;
}

/** Trends weighed together: P(x(τ) ≤ v) = Σ weight·Φ((v − E_k x(τ))/sd_k x(τ)), the weights summing to 1. */
export type TrendMixture = readonly { readonly weight: number; readonly trend: ProjectedTrend }[];

export interface MixtureQuery {
  readonly levelAt: (tau: number) => number | undefined;
  readonly side: 'above' | 'below';
  /** The grid spans [0, horizon] hours. */
  readonly horizon: number;
}

/** P(x(τ) has crossed the level): each trend's normal probability, weighed. */
function crossedProbability(mix: TrendMixture, tau: number, level: number, side: 'above' | 'below'): number {
  let sum = 0;
  for (const { weight, trend } of mix) {
    const p = projectAt(trend, tau);
    const beyond = side === 'above' ? p.mean - level : level - p.mean;
    sum += weight * (p.sd > 0 ? normalCdf(beyond / p.sd) : beyond >= 0 ? 1 : 0);
  }
  return sum;
}

/**
 * As crossingQuantile for normal trends weighed together: `quantile(p, from, to)` is the first τ in [from, to] at
 * which the crossing has happened with probability p; undefined: not within it. The probabilities on the grid over
 * [0, horizon] are worked out once and shared by every quantile; the root search then refines within one step. One
 * trend of weight 1 gives crossingQuantile's answer with z = Φ⁻¹(p) (to within the search's tolerance).
 */
export function mixtureCrossing(mix: TrendMixture, q: MixtureQuery): { quantile: (p: number, from?: number, to?: number) => number | undefined } {
  const probability = (tau: number): number => {
    const level = q.levelAt(tau);
    return level === undefined ? -Infinity : crossedProbability(mix, tau, level, q.side);
  };
  const grid: number[] = [];
  const at = (i: number): number => (grid[i] ??= probability((q.horizon * i) / GRID));
  const quantile = (p: number, from = 0, to = q.horizon): number | undefined => {
    const start = Math.max(0, from);
    const end = Math.min(to, q.horizon);
    const short = (tau: number): number => probability(tau) - p;
    let fPrevious = short(start);
    if (fPrevious >= 0) return start;
    if (!(end > start)) return undefined;
    let previous = start;
    for (let i = Math.floor((start / q.horizon) * GRID) + 1; i <= GRID; i++) {
      const gridTau = (q.horizon * i) / GRID;
      const tau = Math.min(gridTau, end);
      const f = (tau === gridTau ? at(i) : probability(tau)) - p;
      if (f >= 0) return firstReached(short, previous, fPrevious, tau, f);
      if (tau >= end) return undefined;
      previous = tau;
      fPrevious = f;
    }
    return undefined;
  };
  return { quantile };
}

/**
 * The p-quantiles of the mixture's level τ hours on, one per probability of `ps`, the trends projected once: Newton's
 * method on the mixture's distribution function from the weighed trends' own quantiles (or from `starts`, one per
 * probability, each optional, when within the bracket: the quantile at a nearby τ), kept within a bracket that
 * bisection narrows whenever a step would leave it.
 */
export function mixtureLevelQuantiles(mix: TrendMixture, tau: number, ps: readonly number[], starts?: readonly (number | undefined)[]): number[] {
  const points = mix.map(({ weight, trend }) => ({ weight, ...projectAt(trend, tau) }));
  return ps.map((p, i) => levelQuantile(points, p, starts?.[i]));
}

function levelQuantile(points: readonly { readonly weight: number; readonly mean: number; readonly sd: number }[], p: number, start: number | undefined): number {
  const z = normalQuantileOf(p);
  let lo = Infinity;
  let hi = -Infinity;
  let guess = 0;
  for (const x of points) {
    lo = Math.min(lo, x.mean + Math.min(z, 0) * x.sd - x.sd);
    hi = Math.max(hi, x.mean + Math.max(z, 0) * x.sd + x.sd);
    guess += x.weight * (x.mean + z * x.sd);
  }
  if (!(hi > lo)) return lo;
  let x = start !== undefined && start > lo && start < hi ? start : guess;
  for (let j = 0; j < 100; j++) {
    let f = -p;
    let density = 0;
    for (const q of points) {
      if (q.sd > 0) {
        const u = (x - q.mean) / q.sd;
        f += q.weight * normalCdf(u);
        density += (q.weight * Math.exp(-0.5 * u * u)) / (q.sd * Math.sqrt(2 * Math.PI));
      } else if (x >= q.mean) f += q.weight;
    }
    if (f >= 0) hi = x;
    else lo = x;
    const step = density > 0 ? x - f / density : NaN;
    const next = step > lo && step < hi ? step : (lo + hi) / 2;
    if (Math.abs(next - x) <= 1e-12 * Math.max(1, Math.abs(x)) || hi - lo <= 1e-12 * Math.max(1, Math.abs(x))) return next;
    x = next;
  }
  return x;
}
