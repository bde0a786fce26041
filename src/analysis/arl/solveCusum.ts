/** The CUSUM decision interval h that gives a target in-control (zero-shift) average run length, for a given k. */
import { cusumArl } from './cusumArl.ts';
import { memoize } from './memo.ts';
import { checkTargetRunLength } from './runLengthEquation.ts';
import { solveIncreasing } from './solveIncreasing.ts';

export interface CusumDecisionIntervalOptions {
  readonly k: number;
  /** In-control average run length to meet, in samples. */
  readonly arl0: number;
  readonly sided: 'one' | 'two';
  /** Headstart as a fraction of h, kept while h is varied; default 0. */
  readonly headstart?: number;
}

const solve = memoize(
  (o: Required<CusumDecisionIntervalOptions>): number =>
    solveIncreasing({ f: (h) => cusumArl({ k: o.k, h, shift: 0, sided: o.sided, headstart: o.headstart }), target: o.arl0, guess: 4, name: 'decision interval h' }),
  (o) => `${o.k}|${o.arl0}|${o.sided}|${o.headstart}`,
);

export function cusumDecisionInterval(o: CusumDecisionIntervalOptions): number {
  checkTargetRunLength(o.arl0);
  return solve({ k: o.k, arl0: o.arl0, sided: o.sided, headstart: o.headstart ?? 0 });
}
