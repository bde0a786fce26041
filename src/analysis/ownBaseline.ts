/**
 * A component's own baseline: its first stable intervals after running-in (not censored, not running-in),
 * counted from the last component change. Once complete its sums are fixed (they are what the group pools);
 * the filter starts from the rate they give and refines it slowly (see innovations.ts).
 */
import type { Detection } from '../domain/config.ts';
import { addInterval, EMPTY_SUMS } from './baseline.ts';
import { labVariance } from './labNoise.ts';
import type { BaselineSums, Interval } from './model.ts';

export interface OwnBaseline {
  readonly sums: BaselineSums;
  /** Index (into the intervals) of the interval that completed the baseline; monitoring starts after it. */
  readonly completedAt: number;
}

export function isStable(i: Interval): boolean {
  return !i.censored && !i.runningIn;
}

/** Lab variance of an interval's increment: both readings carry lab noise; the first is scaled by the dilution. */
export function incrementLabVariance(i: Interval, noise: Detection['labNoise']): number {
  const fromLevel = i.carryOver > 0 ? i.baseLevel / i.carryOver : 0;
  return labVariance(noise, i.level) + labVariance(noise, fromLevel) * i.carryOver ** 2;
}

export function ownBaseline(intervals: readonly Interval[], detection: Detection, since: number): OwnBaseline | undefined {
  let sums = EMPTY_SUMS;
  for (let n = since; n < intervals.length; n++) {
    const i = intervals[n]!;
    if (!isStable(i)) continue;
    sums = addInterval(sums, i, incrementLabVariance(i, detection.labNoise));
    if (sums.intervals >= detection.baselineIntervals) return { sums, completedAt: n };
  }
  return undefined;
}
