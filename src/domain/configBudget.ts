/**
 * The arithmetic from the false-alarm budget (`detection.budget`) to the in-control run length each side of a chart
 * needs, and the range of run lengths the chart limits can be designed for. The configuration checks its budgets with
 * it when it is parsed, and analysis/budget.ts designs the limits from the same figures.
 */
import type { Budget, Detection, Population } from './config.ts';
import { normalCdf } from './normal.ts';

/**
 * Per-chart in-control run lengths, in samples, for which h and L are derived from the budget.
 *
 * The upper end is where the run-length integral equations stop being reliable in double precision
 * (analysis/arl/runLengthEquation.ts, checkTargetRunLength). The lower end is where every chart of the published
 * design tables can still meet the target: the shortest run length a one-sided CUSUM reaches (h → 0) is
 * 1 / (1 − Φ(k)), 15 samples at k = 1.5; a one-sided EWMA with exact limits reaches about 3.6 samples at λ = 0.2 and
 * about 13 at λ = 0.01. A chart asked to alarm falsely every few samples is no change detector either.
 */
export const DESIGNABLE_RUN_LENGTH = { min: 20, max: 1e8 } as const;

/**
 * The EWMA smoothing constants whose run lengths are computed (limits designed, ARL tables shown): from 0.01, the
 * smallest of the published design tables (Lucas & Saccucci 1990 tabulate λ from 0.03; from memory, later tables go to
 * 0.01), to 1. Below it the exact time-varying limits take thousands of steps to settle and one design takes minutes of
 * CPU (85 s at λ = 0.001 measured on 2 cores), while a chart that remembers hundreds of samples (decades of oil samples)
 * is no early warning.
 */
export const DESIGNABLE_EWMA_LAMBDA = { min: 0.01, max: 1 } as const;

/** Why an EWMA smoothing constant cannot be designed for (names where it was given), or undefined when it can. */
export function ewmaLambdaIssue(lambda: number, where: string): string | undefined {
  if (lambda >= DESIGNABLE_EWMA_LAMBDA.min && lambda <= DESIGNABLE_EWMA_LAMBDA.max) return undefined;
  return `${where} must be from ${DESIGNABLE_EWMA_LAMBDA.min} to ${DESIGNABLE_EWMA_LAMBDA.max} (the range of the published EWMA design tables), got ${lambda}`;
}

/**
 * The shortest in-control run length a one-sided CUSUM with reference value `k` (in sigma) can be designed for: with
 * the decision interval h → 0 it signals whenever one standardised value exceeds k, once in 1 / (1 − Φ(k)) samples
 * (Φ the standard normal distribution function). About 3.2 samples at k = 0.5, 15 at k = 1.5, 741 at k = 3.
 */
export function cusumShortestRunLength(k: number): number {
  return 1 / normalCdf(-k);
}

/** Samples one component gives in the budget period. */
export function samplesPerBudgetPeriod(b: Budget): number {
  return (b.years * b.hoursPerYear) / b.sampleIntervalHours;
}

/** The part of the false-alarm budget the change detectors get: all of it unless the comparison with peers takes a share. */
export function changeBudgetShare(population: Pick<Population, 'peers'>): number {
  return population.peers.enabled ? 1 - population.peers.budgetShare : 1;
}

/**
 * The parts of the budget each side of the change detectors' charts gets: the rise side (wear incidents) the change
 * detectors' share less `detection.fallShare` of it, the fall side (sampling incidents, two-sided charts only) that part.
 */
export function sideShares(d: Pick<Detection, 'sided' | 'fallShare'>, population: Pick<Population, 'peers'>): { rise: number; fall?: number } {
  const share = changeBudgetShare(population);
  if (d.sided !== 'two') return { rise: share };
  const fall = share * d.fallShare;
  return { rise: share - fall, fall };
}

/** Charts of one component: detection measurands × enabled detectors (at least 1, so that the limits stay defined). */
export function chartsPerComponent(d: Pick<Detection, 'measurands' | 'ewma' | 'cusum'>): number {
  const detectors = (d.ewma.enabled ? 1 : 0) + (d.cusum.enabled ? 1 : 0);
  return Math.max(1, d.measurands.length * detectors);
}

/** In-control run length (samples) each of `charts` charts needs when they share `share` of the budget. */
export function chartRunLength(b: Budget, charts: number, share: number): number {
  return ((samplesPerBudgetPeriod(b) / b.alarms) * charts) / share;
}

/**
 * Why a run length cannot be designed for, or undefined when it can: names the run length of `subject` (e.g. "each
 * chart's rise side"), how it follows from the budget (`derivation`) and the range, and says which way to move.
 */
export function runLengthOutOfRange(arl0: number, subject: string, derivation: string): string | undefined {
  if (arl0 >= DESIGNABLE_RUN_LENGTH.min && arl0 <= DESIGNABLE_RUN_LENGTH.max) return undefined;
  return (
    `gives ${subject} an in-control run length of ${figure(arl0)} samples (${derivation}); ` +
    `chart limits can be derived for ${DESIGNABLE_RUN_LENGTH.min} to ${DESIGNABLE_RUN_LENGTH.max} samples: ${arl0 < DESIGNABLE_RUN_LENGTH.min ? 'allow fewer false alarms or a longer period' : 'allow more false alarms or a shorter period'}`
  );
}

/** How a per-chart run length follows from a budget, in figures. */
export function runLengthDerivation(b: Budget, charts: number, share: number): string {
  return (
    `${figure(b.years)} year(s) × ${figure(b.hoursPerYear)} h / ${figure(b.sampleIntervalHours)} h = ${figure(samplesPerBudgetPeriod(b))} samples per component, ` +
    `/ ${figure(b.alarms)} false alarm(s) × ${charts} chart(s) / ${figure(share)} of the budget`
  );
}

/**
 * The check of one scope's budget (top level or a group's resolved settings): undefined when both sides' run lengths
 * can be designed for, or when both h and L are set, so that nothing is derived from the budget.
 */
export function budgetIssue(d: Detection, population: Pick<Population, 'peers'>): string | undefined {
  if (d.ewma.L !== undefined && d.cusum.h !== undefined) return undefined;
  const charts = chartsPerComponent(d);
  const shares = sideShares(d, population);
  const b = d.budget;
  const sides: [string, number | undefined][] = [
    ['rise side', shares.rise],
    ['fall side', shares.fall],
  ];
  for (const [side, share] of sides) {
    if (share === undefined) continue;
    const arl0 = chartRunLength(b, charts, share);
    const issue = runLengthOutOfRange(arl0, `each chart's ${side}`, runLengthDerivation(b, charts, share));
    if (issue !== undefined) return `a budget of ${figure(b.alarms)} false alarm(s) per component per ${figure(b.years)} year(s) ${issue}, or set detection.cusum.h and detection.ewma.L`;
    const shortest = d.cusum.enabled && d.cusum.h === undefined ? cusumShortestRunLength(d.cusum.k) : 0;
    if (arl0 < shortest) {
      return (
        `a budget of ${figure(b.alarms)} false alarm(s) per component per ${figure(b.years)} year(s) gives each chart's ${side} an in-control run length of ${figure(arl0)} samples ` +
        `(${runLengthDerivation(b, charts, share)}); a CUSUM with reference value k = ${figure(d.cusum.k)} alarms falsely every ${figure(shortest)} samples at the most, ` +
        'even with the smallest decision interval: allow fewer false alarms or a longer period, choose a smaller detection.cusum.k, or set detection.cusum.h'
      );
    }
  }
  return undefined;
}

function figure(x: number): string {
  return String(Number(x.toPrecision(4)));
}
