/**
 * Wear-metal intervals: what one oil charge gained between two readings, corrected for make-up oil and for
 * the oil left over from the previous charge, per operating hour. A rising concentration alone says little:
 * its slope against the hours on the charge is the wear rate.
 */
import { MEASURANDS, type Measurand } from '../domain/measurands.ts';
import type { ComponentSettings } from '../domain/settings.ts';
import { advanceCharge, type ChargeTrack } from './fold/chargeTrack.ts';
import { advanceWear, EMPTY_WEAR_TRACK, rollOverCharge, type WearTrack } from './fold/wearTrack.ts';
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
export { MIN_INTERVAL_HOURS } from './fold/wearTrack.ts';

export function wearIntervals(history: ComponentHistory, measurand: Measurand, settings: ComponentSettings): Interval[] {
  if (MEASURANDS[measurand].kind !== 'wear') return [];
  const intervals: Interval[] = [];
  let charge: ChargeTrack | undefined;
  let track: WearTrack = EMPTY_WEAR_TRACK;
  for (const sample of history.samples) {
    const next = advanceCharge(charge, sample);
    charge = next.track;
    if (next.newCharge) track = rollOverCharge(track);
    const r = advanceWear(track, sample, measurand, charge, settings);
    track = r.track;
    if (r.interval !== undefined) intervals.push(r.interval);
  }
  return intervals;
}
