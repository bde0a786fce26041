/**
 * Where the fold stands on the oil charges: which charge the latest sample is on, how it started, the oil hours
 * last seen on it, and the last component change. A new charge starts at a sample marked `componentChanged` or
 * `oilChanged`, or where the oil hours are lower than the last oil hours known on the current charge (a drain
 * nobody reported). Plain JSON, so that it travels in a checkpoint.
 */
import type { Sample } from '../../domain/event.ts';
import type { Charge } from '../model.ts';

export interface ChangeMark {
  readonly unitHours?: number;
  readonly oilHours?: number;
  readonly chargeIndex: number;
}

export interface ChargeTrack {
  readonly index: number;
  readonly startedBy: Charge['startedBy'];
  /** The last oil hours known on this charge. */
  readonly lastOilHours?: number;
  /** The charge was started by a component change: the oil is taken to be fresh. */
  readonly freshOil: boolean;
  /** The last sample marked componentChanged, for running-in. */
  readonly lastChange?: ChangeMark;
}

export function known(n: number | undefined): number | undefined {
  return n === undefined || Number.isNaN(n) ? undefined : n;
}

export function chargeStart(s: Sample, lastOilHours: number | undefined): Charge['startedBy'] | undefined {
  if (s.componentChanged) return 'componentChanged';
  if (s.oilChanged) return 'oilChanged';
  if (s.oilHours !== undefined && lastOilHours !== undefined && s.oilHours < lastOilHours) return 'oilHoursReset';
  return undefined;
}

/** The charge track after `sample`, and whether the sample opened a new charge. */
export function advanceCharge(track: ChargeTrack | undefined, sample: Sample): { track: ChargeTrack; newCharge: boolean } {
  const lastChange = sample.componentChanged ? { ...optionalHours(sample), chargeIndex: 0 } : undefined;
  if (track === undefined) {
    const first: ChargeTrack = { index: 0, startedBy: 'first', freshOil: sample.componentChanged, ...withOil(known(sample.oilHours)), ...(lastChange && { lastChange }) };
    return { track: first, newCharge: false };
  }
  const startedBy = chargeStart(sample, track.lastOilHours);
  const index = startedBy === undefined ? track.index : track.index + 1;
  const lastOilHours = known(sample.oilHours) ?? (startedBy === undefined ? track.lastOilHours : undefined);
  const change = lastChange ? { ...lastChange, chargeIndex: index } : track.lastChange;
  return {
    track: {
      index,
      startedBy: startedBy ?? track.startedBy,
      freshOil: startedBy === undefined ? track.freshOil : sample.componentChanged,
      ...withOil(lastOilHours),
      ...(change && { lastChange: change }),
    },
    newCharge: startedBy !== undefined,
  };
}

function withOil(h: number | undefined): { lastOilHours?: number } {
  return h === undefined ? {} : { lastOilHours: h };
}

function optionalHours(s: Sample): { unitHours?: number; oilHours?: number } {
  return { ...(s.unitHours !== undefined && { unitHours: s.unitHours }), ...(s.oilHours !== undefined && { oilHours: s.oilHours }) };
}
