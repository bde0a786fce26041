/**
 * Wear-metal intervals: what one oil charge gained between two readings, corrected for make-up oil and for
 * the oil left over from the previous charge, per operating hour. A rising concentration alone says little:
 * its slope against the hours on the charge is the wear rate.
 */
import type { Sample } from '../domain/event.ts';
import { MEASURANDS, type Measurand } from '../domain/measurands.ts';
import type { ComponentSettings } from '../domain/settings.ts';
import type { ComponentHistory, Interval } from './model.ts';

/**
 * The intervals of one wear metal over the whole history, in time order. For each reading `b` with a
 * predecessor `a` (the previous reading of the same measurand; samples without it are passed over):
 *
 * - On one charge: hours = b.oilHours − a.oilHours, or the unit-hours difference when either oil hours are
 *   missing. Make-up oil replaces oil consumed and carries no wear metal, so with a known sump volume the
 *   level a would have with no wear is diluted: carryOver = Π (1 − min(1, topUp/sump)) over the samples after
 *   a up to b (one factor when a and b are neighbours); without a sump volume carryOver = 1.
 * - First reading on a charge after a drain (oilChanged or oil hours reset): a = the last reading of the
 *   previous charge, carryOver = residualFraction, hours = b.oilHours (hours on the new charge only, so no
 *   unit-hours fallback). Make-up oil is not counted here: on an oil-change sample it may be the fill itself.
 *   When the previous charge has no reading of this measurand, the starting level is unknown: no interval.
 * - First reading on a charge started by componentChanged: the oil is taken to be fresh and the old
 *   component's metal gone, so carryOver = 0 (the interval runs from clean oil; `from` is the previous
 *   charge's last reading, if any, for reference), hours = b.oilHours.
 * - The first reading of the history has no predecessor and gives no interval, unless its charge was
 *   started by a component change (then it runs from clean oil as above).
 *
 * baseLevel = carryOver · c_a, increment = c_b − baseLevel, rate = increment / hours (ppm/h; may be negative,
 * lab noise included). An interval with unknown or non-positive hours is skipped.
 * censored: a reading that enters the arithmetic is censored; its bound stands in for its value, and such
 * an interval never raises a finding. runningIn: the interval ends within detection.runningInHours of the
 * last componentChanged sample, counted in unit hours, or in oil hours when both lie on the charge that
 * change started and unit hours are missing; with neither the interval is not taken as running-in.
 *
 * Only wear measurands (catalogue kind 'wear') have intervals; any other measurand gives none.
 */
/**
 * Two samples less than an operating hour apart are a re-sample, not a wear interval: the rise over so short a
 * run is lab noise divided by almost nothing. Such a pair gives no interval (the readings still count as readings).
 */
export const MIN_INTERVAL_HOURS = 1;

export function wearIntervals(history: ComponentHistory, measurand: Measurand, settings: ComponentSettings): Interval[] {
  if (MEASURANDS[measurand].kind !== 'wear') return [];
  const intervals: Interval[] = [];
  const runningInHours = settings.detection.runningInHours;
  let lastChange: { sample: Sample; chargeIndex: number } | undefined;
  let previousChargeLast: ReadingAt | undefined;
  for (const charge of history.charges) {
    const freshOil = charge.samples[0]?.componentChanged === true;
    let previous: ReadingAt | undefined;
    let makeUpShare = 1;
    for (const sample of charge.samples) {
      if (sample.componentChanged) lastChange = { sample, chargeIndex: charge.index };
      if (previous !== undefined) makeUpShare *= 1 - makeUpFraction(sample, settings.sumpLitres);
      const current = readingAt(sample, measurand);
      if (current === undefined) continue;

      const step = previous
        ? { from: previous, carryOver: makeUpShare, hours: hoursBetween(previous.sample, sample), firstOfCharge: false }
        : freshOil
          ? { from: previousChargeLast, carryOver: 0, hours: sample.oilHours ?? NaN, firstOfCharge: true }
          : charge.index > 0 && previousChargeLast
            ? { from: previousChargeLast, carryOver: settings.residualFraction, hours: sample.oilHours ?? NaN, firstOfCharge: true }
            : undefined;
      previous = current;
      makeUpShare = 1;
      if (step === undefined || !(step.hours >= MIN_INTERVAL_HOURS)) continue;

      const fromLevel = step.from?.level ?? 0;
      const baseLevel = step.carryOver * fromLevel;
      const increment = current.level - baseLevel;
      intervals.push({
        measurand,
        chargeIndex: charge.index,
        to: sample,
        ...(step.from && { from: step.from.sample }),
        firstOfCharge: step.firstOfCharge,
        hours: step.hours,
        carryOver: step.carryOver,
        baseLevel,
        level: current.level,
        increment,
        rate: increment / step.hours,
        censored: current.censored || (step.carryOver > 0 && step.from?.censored === true),
        runningIn: lastChange !== undefined && hoursSince(lastChange, sample, charge.index) <= runningInHours,
      });
    }
    previousChargeLast = previous;
  }
  return intervals;
}

interface ReadingAt {
  readonly sample: Sample;
  readonly level: number;
  readonly censored: boolean;
}

function readingAt(sample: Sample, measurand: Measurand): ReadingAt | undefined {
  const r = sample.readings[measurand];
  if (r === undefined || r.kind === 'code') return undefined;
  return r.kind === 'value' ? { sample, level: r.value, censored: false } : { sample, level: r.limit, censored: true };
}

function makeUpFraction(sample: Sample, sumpLitres: number | undefined): number {
  if (sumpLitres === undefined || !(sample.topUpLitres > 0)) return 0;
  return Math.min(1, sample.topUpLitres / sumpLitres);
}

function hoursBetween(a: Sample, b: Sample): number {
  const oil = difference(a.oilHours, b.oilHours);
  return Number.isNaN(oil) ? difference(a.unitHours, b.unitHours) : oil;
}

function hoursSince(change: { sample: Sample; chargeIndex: number }, sample: Sample, chargeIndex: number): number {
  const unit = difference(change.sample.unitHours, sample.unitHours);
  if (!Number.isNaN(unit) || change.chargeIndex !== chargeIndex) return unit;
  return difference(change.sample.oilHours, sample.oilHours);
}

/** y − x; NaN when either is unknown, so that every comparison with it is false. */
function difference(x: number | undefined, y: number | undefined): number {
  return x === undefined || y === undefined ? NaN : y - x;
}
