/** The EWMA limit width L (in standard deviations of the statistic) that gives a target in-control average run length. */
import { ewmaArl } from './ewmaArl.ts';
import { memoize } from './memo.ts';
import { checkTargetRunLength } from './runLengthEquation.ts';
import { solveIncreasing } from './solveIncreasing.ts';

export interface EwmaLimitWidthOptions {
  readonly lambda: number;
  /** In-control average run length to meet, in samples. */
  readonly arl0: number;
  readonly sided: 'one' | 'two';
  /** Design for time-varying exact limits; default false: steady-state limits, as in the published tables. */
  readonly exactLimits?: boolean;
}

const solve = memoize(
  (o: Required<EwmaLimitWidthOptions>): number =>
    solveIncreasing({ f: (L) => ewmaArl({ lambda: o.lambda, L, shift: 0, sided: o.sided, exactLimits: o.exactLimits }), target: o.arl0, guess: 3, name: 'limit width L' }),
  (o) => `${o.lambda}|${o.arl0}|${o.sided}|${o.exactLimits}`,
);

export function ewmaLimitWidth(o: EwmaLimitWidthOptions): number {
  checkTargetRunLength(o.arl0);
  return solve({ lambda: o.lambda, arl0: o.arl0, sided: o.sided, exactLimits: o.exactLimits ?? false });
}
