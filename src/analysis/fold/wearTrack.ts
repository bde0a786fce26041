/**
 * Wear-metal intervals, one sample at a time: what the charge gained between two readings of a metal, corrected
 * for make-up oil and for the oil left over from the previous charge, per operating hour (see intervals.ts for
 * the rules). The track keeps, per metal, the previous reading on the current charge, the make-up share since
 * then and the last reading of the previous charge.
 */
import type { Sample } from '../../domain/event.ts';
import type { Measurand } from '../../domain/measurands.ts';
import type { ComponentSettings } from '../../domain/settings.ts';
import type { Interval } from '../model.ts';
import type { ChangeMark, ChargeTrack } from './chargeTrack.ts';

/** A reading as the interval arithmetic needs it later. */
export interface ReadingMark {
  readonly sampleId: string;
  readonly sampledAt: string;
  readonly level: number;
  readonly censored: boolean;
  readonly oilHours?: number;
  readonly unitHours?: number;
}

export interface WearTrack {
  readonly previous?: ReadingMark;
  /** Π(1 − topUp/sump) over the samples after `previous` so far. */
  readonly makeUpShare: number;
  /** The last reading of the previous charge (none when that charge had no reading of this metal). */
  readonly previousChargeLast?: ReadingMark;
}

/**
 * Two samples less than an operating hour apart are a re-sample, not a wear interval: the rise over so short a
 * run is lab noise divided by almost nothing.
 */
export const MIN_INTERVAL_HOURS = 1;

export const EMPTY_WEAR_TRACK: WearTrack = { makeUpShare: 1 };

/** At a new charge: the previous reading becomes the previous charge's last; make-up counting starts again. */
export function rollOverCharge(t: WearTrack): WearTrack {
  return { makeUpShare: 1, ...(t.previous && { previousChargeLast: t.previous }) };
}

export function readingMark(sample: Sample, measurand: Measurand): ReadingMark | undefined {
  const r = sample.readings[measurand];
  if (r === undefined || r.kind === 'code') return undefined;
  const level = r.kind === 'value' ? r.value : r.limit;
  return {
    sampleId: sample.sampleId,
    sampledAt: sample.sampledAt,
    level,
    censored: r.kind !== 'value',
    ...(sample.oilHours !== undefined && { oilHours: sample.oilHours }),
    ...(sample.unitHours !== undefined && { unitHours: sample.unitHours }),
  };
}

/**
 * One sample's effect on one metal's track, and the interval ending at the sample when there is one.
 * `charge` is the charge track after the sample (see chargeTrack.ts).
 */
export function advanceWear(
  t: WearTrack,
  sample: Sample,
  measurand: Measurand,
  charge: ChargeTrack,
  settings: ComponentSettings,
): { track: WearTrack; interval?: Interval } {
  const makeUpShare = t.previous !== undefined ? t.makeUpShare * (1 - makeUpFraction(sample, settings.sumpLitres)) : t.makeUpShare;
  const current = readingMark(sample, measurand);
  if (current === undefined) return { track: { ...t, makeUpShare } };
  const from = t.previous ?? t.previousChargeLast;
  const step = t.previous
    ? { carryOver: makeUpShare, hours: hoursBetween(t.previous, sample), firstOfCharge: false }
    : charge.freshOil
      ? { carryOver: 0, hours: sample.oilHours ?? NaN, firstOfCharge: true }
      : charge.index > 0 && t.previousChargeLast
        ? { carryOver: settings.residualFraction, hours: sample.oilHours ?? NaN, firstOfCharge: true }
        : undefined;
  const track: WearTrack = { makeUpShare: 1, previous: current, ...(t.previousChargeLast && { previousChargeLast: t.previousChargeLast }) };
  if (step === undefined || !(step.hours >= MIN_INTERVAL_HOURS)) return { track };
  const fromLevel = from?.level ?? 0;
  const baseLevel = step.carryOver * fromLevel;
  const increment = current.level - baseLevel;
  const interval: Interval = {
    measurand,
    chargeIndex: charge.index,
    to: sample,
    ...(from && { from: { sampleId: from.sampleId, sampledAt: from.sampledAt } }),
    firstOfCharge: step.firstOfCharge,
    hours: step.hours,
    carryOver: step.carryOver,
    baseLevel,
    level: current.level,
    increment,
    rate: increment / step.hours,
    censored: current.censored || (step.carryOver > 0 && from?.censored === true),
    runningIn: charge.lastChange !== undefined && hoursSince(charge.lastChange, sample, charge.index) <= settings.detection.runningInHours,
  };
  return { track, interval };
}

function makeUpFraction(sample: Sample, sumpLitres: number | undefined): number {
  if (sumpLitres === undefined || !(sample.topUpLitres > 0)) return 0;
  return Math.min(1, sample.topUpLitres / sumpLitres);
}

function hoursBetween(a: ReadingMark, b: Sample): number {
  const oil = difference(a.oilHours, b.oilHours);
  return Number.isNaN(oil) ? difference(a.unitHours, b.unitHours) : oil;
}

function hoursSince(change: ChangeMark, sample: Sample, chargeIndex: number): number {
  const unit = difference(change.unitHours, sample.unitHours);
  if (!Number.isNaN(unit) || change.chargeIndex !== chargeIndex) return unit;
  return difference(change.oilHours, sample.oilHours);
}

/** y − x; NaN when either is unknown, so that every comparison with it is false. */
function difference(x: number | undefined, y: number | undefined): number {
  return x === undefined || y === undefined ? NaN : y - x;
}
