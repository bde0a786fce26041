/**
 * What the forecast needs beyond the change-detection state, kept in the fold's state one sample at a time:
 * the hours run per calendar day (recent unit-hours readings), the make-up oil of the present charge, how many
 * intervals the filter has judged on it per wear metal (and the rate of the intervals since an upward change
 * was signalled, while the filter holds its own rate), its last RECENT_INTERVALS judged intervals (for the recent
 * trend the forecast weighs beside the filter's), and for measurands the filter does not watch, the sums of
 * a straight-line fit to the present charge's readings. Plain JSON, constant size per measurand.
 */
import type { Sample } from '../../domain/event.ts';
import type { Measurand } from '../../domain/measurands.ts';
import type { ComponentSettings } from '../../domain/settings.ts';
import type { ChangePoint, ChangeTrack } from '../fold/changeTrack.ts';
import type { Interval } from '../model.ts';
import { incrementLabVariance } from '../ownBaseline.ts';

export interface UsagePoint {
  readonly time: number;
  readonly unitHours: number;
}

/** Least-squares sums of the uncensored readings on the present charge, t in oil hours. */
export interface TrendSums {
  readonly n: number;
  readonly st: number;
  readonly stt: number;
  readonly sy: number;
  readonly sty: number;
  readonly syy: number;
}

export interface LastReading {
  readonly sampleId: string;
  readonly sampledAt: string;
  readonly oilHours?: number;
  readonly level: number;
  readonly censored: boolean;
}

export interface TrendTrack {
  readonly sums: TrendSums;
  /** Readings on the present charge, censored ones included. */
  readonly readings: number;
  readonly censored: number;
  readonly last?: LastReading;
}

/** The rate of the intervals since an upward signal began: sums for the ratio estimator of baseline.ts. */
export interface SinceSignal {
  readonly intervals: number;
  readonly hours: number;
  readonly increment: number;
  readonly labVariance: number;
}

/** One judged interval of the recent window: what the ratio estimator needs. */
export interface RecentInterval {
  readonly hours: number;
  readonly increment: number;
  readonly labVariance: number;
}

/**
 * Judged intervals kept for the recent trend (newest last): enough to fit a rate and its change per hour with some
 * degrees of freedom to spare, few enough to be recent (at the usual 100–250 h between samples, one or two charges).
 * Kept across oil changes (an interval over a drain measures wear from the residual oil on), started afresh when the
 * component is replaced.
 */
export const RECENT_INTERVALS = 8;

export interface FilterCounts {
  /** Intervals the filter updated on, on the present charge. */
  readonly updates: number;
  /** Censored intervals on the present charge. */
  readonly censored: number;
  readonly since?: SinceSignal;
  /** The last RECENT_INTERVALS judged, uncensored intervals (newest last). */
  readonly recent?: readonly RecentInterval[];
}

export interface ForecastTrack {
  readonly chargeIndex: number;
  /** The last oil hours known on the present charge. */
  readonly oilHours?: number;
  /** Oil hours the recent past charges ran to before their drain, newest last (the expected charge length when none is planned). */
  readonly pastCharges?: readonly number[];
  /** Newest last. */
  readonly usage: readonly UsagePoint[];
  /** Σ −ln(1 − topUp/sump) over the present charge: the make-up oil's dilution in oil-hours terms. */
  readonly topUp: number;
  readonly filter: Readonly<Partial<Record<Measurand, FilterCounts>>>;
  readonly trend: Readonly<Partial<Record<Measurand, TrendTrack>>>;
}

export const EMPTY_TREND_SUMS: TrendSums = { n: 0, st: 0, stt: 0, sy: 0, sty: 0, syy: 0 };

export interface ForecastStepInput {
  readonly sample: Sample;
  readonly chargeIndex: number;
  readonly newCharge: boolean;
  readonly settings: ComponentSettings;
  readonly intervals: ReadonlyMap<Measurand, Interval>;
  readonly points: readonly ChangePoint[];
  /** The change tracks after the sample. */
  readonly change: Readonly<Partial<Record<Measurand, ChangeTrack>>>;
  /** Measurands fitted with a straight line (see forecastMeasurands). */
  readonly trendMeasurands: readonly Measurand[];
  /** Unit-hours readings kept. */
  readonly usageSamples: number;
}

/** A make-up share this close to 1 is a refill, not a top-up; capped so the logarithm stays finite. */
const MAX_TOP_UP_SHARE = 0.95;
/** Past charges remembered for the expected charge length. */
const PAST_CHARGES = 3;

export function advanceForecast(track: ForecastTrack | undefined, input: ForecastStepInput): ForecastTrack {
  const { sample, settings } = input;
  const fresh = track === undefined || input.newCharge || track.chargeIndex !== input.chargeIndex;
  const filter: Partial<Record<Measurand, FilterCounts>> = {};
  for (const [m, c] of Object.entries(track?.filter ?? {}) as [Measurand, FilterCounts][]) {
    filter[m] = fresh ? { updates: 0, censored: 0, ...(c.since && { since: c.since }), ...(c.recent && { recent: c.recent }) } : c;
  }
  const trend: Partial<Record<Measurand, TrendTrack>> = fresh ? {} : { ...track.trend };
  let topUp = fresh ? 0 : track.topUp;
  if (!fresh && settings.sumpLitres !== undefined && sample.topUpLitres > 0) {
    topUp += -Math.log(1 - Math.min(MAX_TOP_UP_SHARE, sample.topUpLitres / settings.sumpLitres));
  }
  const pastCharges = [...(track?.pastCharges ?? [])];
  if (track !== undefined && fresh && track.oilHours !== undefined) {
    pastCharges.push(track.oilHours);
    if (pastCharges.length > PAST_CHARGES) pastCharges.splice(0, pastCharges.length - PAST_CHARGES);
  }
  const oilHours = sample.oilHours ?? (fresh ? undefined : track.oilHours);
  const usage = [...(track?.usage ?? [])];
  if (sample.unitHours !== undefined && Number.isFinite(sample.unitHours)) {
    usage.push({ time: sample.time, unitHours: sample.unitHours });
    if (usage.length > input.usageSamples) usage.splice(0, usage.length - input.usageSamples);
  }
  const judged = new Set(input.points.map((p) => p.interval.measurand));
  for (const [m, iv] of input.intervals) {
    if (!settings.detection.measurands.includes(m)) continue;
    const before = filter[m] ?? { updates: 0, censored: 0 };
    const updated = !iv.censored && judged.has(m);
    const signalling = input.change[m]?.signalSince !== undefined;
    const since = signalling && updated ? addSince(before.since, iv, settings) : signalling ? before.since : undefined;
    const kept = iv.to.componentChanged === true ? [] : (before.recent ?? []);
    const recent = updated ? [...kept, { hours: iv.hours, increment: iv.increment, labVariance: incrementLabVariance(iv, settings.detection.labNoise) }].slice(-RECENT_INTERVALS) : kept;
    filter[m] = {
      updates: before.updates + (updated ? 1 : 0),
      censored: before.censored + (iv.censored ? 1 : 0),
      ...(since && { since }),
      ...(recent.length > 0 && { recent }),
    };
  }
  for (const m of input.trendMeasurands) {
    const r = sample.readings[m];
    if (r === undefined || r.kind === 'code') continue;
    const before = trend[m] ?? { sums: EMPTY_TREND_SUMS, readings: 0, censored: 0 };
    const level = r.kind === 'value' ? r.value : r.limit;
    const censored = r.kind !== 'value';
    const t = sample.oilHours;
    const sums = !censored && t !== undefined ? addPoint(before.sums, t, level) : before.sums;
    trend[m] = {
      sums,
      readings: before.readings + 1,
      censored: before.censored + (censored ? 1 : 0),
      last: { sampleId: sample.sampleId, sampledAt: sample.sampledAt, level, censored, ...(t !== undefined && { oilHours: t }) },
    };
  }
  return {
    chargeIndex: input.chargeIndex,
    ...(oilHours !== undefined && { oilHours }),
    ...(pastCharges.length > 0 && { pastCharges }),
    usage,
    topUp,
    filter,
    trend,
  };
}

function addSince(s: SinceSignal | undefined, iv: Interval, settings: ComponentSettings): SinceSignal {
  const base = s ?? { intervals: 0, hours: 0, increment: 0, labVariance: 0 };
  return {
    intervals: base.intervals + 1,
    hours: base.hours + iv.hours,
    increment: base.increment + iv.increment,
    labVariance: base.labVariance + incrementLabVariance(iv, settings.detection.labNoise),
  };
}

function addPoint(s: TrendSums, t: number, y: number): TrendSums {
  return { n: s.n + 1, st: s.st + t, stt: s.stt + t * t, sy: s.sy + y, sty: s.sty + t * y, syy: s.syy + y * y };
}
