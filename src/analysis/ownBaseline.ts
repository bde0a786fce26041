/**
 * A component's own baseline: its first stable intervals after running-in (not censored, not running-in),
 * counted from the last component change. Once complete its sums are fixed (they are what the group pools);
 * the filter starts from the rate they give and refines it slowly (see fold/changeTrack.ts).
 */
import type { Detection } from '../domain/config.ts';
import { labVariance } from './labNoise.ts';
import type { Interval } from './model.ts';

export function isStable(i: Interval): boolean {
  return !i.censored && !i.runningIn;
}

/** Lab variance of an interval's increment: both readings carry lab noise; the first is scaled by the dilution. */
export function incrementLabVariance(i: Interval, noise: Detection['labNoise']): number {
  const fromLevel = i.carryOver > 0 ? i.baseLevel / i.carryOver : 0;
  return labVariance(noise, i.level) + labVariance(noise, fromLevel) * i.carryOver ** 2;
}
