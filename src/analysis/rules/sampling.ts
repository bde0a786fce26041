/**
 * The `sampling` family: sampling and data faults, judged before the sample enters the wear analysis. A bottle of
 * new oil sent by mistake, an unreported drain, a wrong label or another unit's sample is not wear; judged as wear
 * it would open a false incident and corrupt the baselines. Each check compares the sample with the component's
 * own accepted history (never with other units), so its verdict depends on this component's results only.
 *
 * A sample with a finding of this family (other than the two that describe a genuine event: an unreported drain
 * whose metals fell with it, and a wear rate falling over several samples) is *in doubt*: it is kept out of the
 * wear analysis, the baselines and the group statistics, and the findings of other families at it (but alarms) are
 * held, until a responder confirms it; the next sample may agree with it on a new level (`SamplingTrack.doubted`). Findings of this family open a sampling incident, for whoever takes the samples and for
 * the lab, never a machine incident. The thresholds below are our own choices (documented in the README); the lab
 * decides what a sample really was.
 */
import type { Sample } from '../../domain/event.ts';
import type { Finding, SamplingCheck, Severity } from '../../domain/finding.ts';
import { MEASURANDS, measurandsOfKind, type Measurand } from '../../domain/measurands.ts';
import type { Reading } from '../../domain/reading.ts';
import { labVariance } from '../labNoise.ts';
import { findingAt, formatNumber, quantity, readingText, type SampleInput } from './ruleInput.ts';

/** The last accepted sample, as the checks compare with it. */
export interface AcceptedSample {
  readonly sampleId: string;
  readonly oilHours?: number;
  readonly unitHours?: number;
  /** Wear-metal readings: the value, or the bound of a censored reading. */
  readonly wear: Readonly<Partial<Record<Measurand, number>>>;
}

export interface SamplingTrack {
  readonly last?: AcceptedSample;
  /** Fingerprints of the latest samples, for a duplicated bottle. */
  readonly fingerprints: readonly { readonly sampleId: string; readonly fp: string }[];
  /** Latest accepted additive readings on the current charge, per element (oldest first). */
  readonly additives: Readonly<Partial<Record<Measurand, readonly number[]>>>;
  /**
   * The latest sample, when it was put in doubt: the track as if it had been accepted, and its oil hours. A next
   * sample in doubt against the accepted history but not against this one shows the same new level (a replaced hour
   * meter, a change of oil through top-ups, an unreported drain): it is accepted and becomes the reference, so that
   * one doubtful sample never holds back the samples after it.
   */
  readonly doubted?: { readonly track: SamplingTrack; readonly oilHours?: number };
}

export const EMPTY_SAMPLING_TRACK: SamplingTrack = { fingerprints: [], additives: {} };

/** Samples whose fingerprints are kept. */
const FINGERPRINTS_KEPT = 12;
/** Accepted additive readings that form the reference of the charge's oil (their median). */
const ADDITIVE_REFERENCE = 5;
/** A wear metal this high (ppm) on the previous sample is expected to show again on the same charge. */
const NEW_OIL_FROM = 3;
/** The wear metals the charge shows must add up to at least this (ppm) before a sample reading like new oil is judged. */
const NEW_OIL_TOTAL = 8;
/** "Near zero": at most this share of the previous reading (or 1 ppm). */
const NEW_OIL_SHARE = 0.25;
/** A single metal falling below this share of what the charge held, and beyond 4 lab standard deviations. */
const DROP_SHARE = 0.5;
const DROP_FROM = 5;
/** An additive element differs from the charge's oil by more than this share (of the reference, or of 100 ppm). */
const ADDITIVE_SHARE = 0.4;
/** Metals falling to this share of the previous reading when the oil hours went back: the oil was changed. */
const DRAIN_SHARE = 0.6;

export interface SamplingContext {
  /** The oil hours last known on the current charge, before this sample. */
  readonly lastOilHours?: number;
  /** The sample continues the current charge (no oil change reported, oil hours not lower). */
  readonly continuesCharge: boolean;
  /** The sample reports an oil or component change. */
  readonly changeReported: boolean;
  /** Share of the previous reading of each metal that stays with no wear (make-up oil), when known. */
  readonly carryOver: (m: Measurand) => number;
}

export interface SamplingVerdict {
  readonly findings: Finding[];
  /** The sample is in doubt: kept out of the analysis until confirmed. */
  readonly inDoubt: boolean;
}

const WEAR = measurandsOfKind('wear');
const ADDITIVES = measurandsOfKind('additive');

export function samplingChecks(input: SampleInput, track: SamplingTrack, ctx: SamplingContext): SamplingVerdict {
  const s = input.sample;
  const findings: Finding[] = [];
  let inDoubt = false;
  const add = (check: SamplingCheck, measurand: Measurand, severity: Severity, doubt: boolean, value: number, basis: string, explanation: string, threshold?: number) => {
    inDoubt ||= doubt;
    findings.push(
      findingAt(input, s, {
        measurand,
        rule: 'sampling',
        check,
        disposition: 'incident',
        severity,
        value,
        ...(threshold !== undefined && { threshold }),
        basis,
        explanation,
      }),
    );
  };

  const fp = fingerprint(s);
  const twin = fp === undefined ? undefined : track.fingerprints.find((f) => f.fp === fp);
  if (twin !== undefined) {
    const count = Object.keys(s.readings).length;
    add(
      'duplicate-bottle',
      firstMeasurand(s),
      'caution',
      true,
      count,
      'readings',
      `All ${count} readings are identical to those of sample ${twin.sampleId}: the same bottle sent twice or a copied result. ` +
        'Check the label and ask the lab; the sample is kept out of the trend until confirmed.',
    );
  }

  const last = track.last;
  if (last?.unitHours !== undefined && s.unitHours !== undefined && s.unitHours < last.unitHours) {
    add(
      'unit-hours-back',
      firstMeasurand(s),
      'caution',
      true,
      s.unitHours,
      'unit hours',
      `Unit hours ${formatNumber(s.unitHours)} are lower than the ${formatNumber(last.unitHours)} of the last accepted sample, ${last.sampleId}: ` +
        'a wrong label or a replaced hour meter. Check the label; if the meter was replaced, confirm the sample.',
      last.unitHours,
    );
  }

  if (!ctx.changeReported && ctx.lastOilHours !== undefined && s.oilHours !== undefined && s.oilHours < ctx.lastOilHours) {
    const compared = last === undefined ? [] : WEAR.filter((m) => (last.wear[m] ?? 0) >= NEW_OIL_FROM / 2 && valueOf(s.readings[m]) !== undefined);
    const fell = compared.filter((m) => valueOf(s.readings[m])! <= DRAIN_SHARE * last!.wear[m]!);
    const drained = compared.length === 0 || fell.length * 2 >= compared.length;
    const hours = `Oil hours went back from ${formatNumber(ctx.lastOilHours)} to ${formatNumber(s.oilHours)}`;
    add(
      'oil-hours-back',
      compared[0] ?? firstMeasurand(s),
      drained ? 'watch' : 'caution',
      !drained,
      s.oilHours,
      'oil hours',
      drained
        ? `${hours}${compared.length > 0 ? ' and the wear metals fell with them' : ''}: probably an oil change nobody reported; it is treated as a new charge. ` +
            'Record oil changes with the sample (oilChanged).'
        : `${hours} but the wear metals did not fall (${compared.map((m) => `${m} ${readingText(m, s.readings[m]!)} after ${quantity(m, last!.wear[m]!)}`).join(', ')}): ` +
            'a wrong label is more likely than an oil change. Check the label; the sample is kept out of the trend until confirmed.',
      ctx.lastOilHours,
    );
  }

  if (ctx.continuesCharge && last !== undefined) {
    // Every metal the charge already shows (from NEW_OIL_FROM / 2) must read near zero; together they held at least
    // NEW_OIL_TOTAL ppm, and one of them at least NEW_OIL_FROM, so a sample near the detection limit throughout stays clear.
    const shown = WEAR.filter((m) => (last.wear[m] ?? 0) >= NEW_OIL_FROM / 2 && valueOf(s.readings[m]) !== undefined);
    const compared = shown.filter((m) => last.wear[m]! >= NEW_OIL_FROM);
    const nearZero = shown.filter((m) => valueOf(s.readings[m])! <= Math.max(1, NEW_OIL_SHARE * last.wear[m]!));
    const held = shown.reduce((sum, m) => sum + last.wear[m]!, 0);
    if (compared.length >= 1 && held >= NEW_OIL_TOTAL && nearZero.length === shown.length) {
      const list = compared.map((m) => `${m} ${readingText(m, s.readings[m]!)} after ${quantity(m, last.wear[m]!)}`).join(', ');
      add(
        'new-oil-mid-charge',
        compared[0]!,
        'caution',
        true,
        valueOf(s.readings[compared[0]!])!,
        'reading',
        `The wear metals read like new oil in the middle of a charge (${list}) with no oil change reported: a bottle of new oil, ` +
          'a sample from the wrong place, or an unreported drain. Re-sample; if the oil was changed, re-issue the result with oilChanged.',
        last.wear[compared[0]!],
      );
    } else {
      for (const m of WEAR) {
        const p = last.wear[m];
        // A censored "<x" reading counts by its bound: the metal is at most x.
        const x = belowOrAt(s.readings[m]);
        if (p === undefined || x === undefined || p < DROP_FROM) continue;
        const expected = ctx.carryOver(m) * p;
        const sd = Math.sqrt(labVariance(input.settings.detection.labNoise, expected) + labVariance(input.settings.detection.labNoise, x));
        if (!(x < DROP_SHARE * expected && expected - x > 4 * sd)) continue;
        add(
          'reading-drop',
          m,
          'caution',
          true,
          x,
          'reading',
          `${m} ${quantity(m, x)} is far below the ${quantity(m, expected)} the charge already held (sample ${last.sampleId}): a charge does not lose ` +
            'wear metal without a drain or a large top-up. A sample from the wrong place or a mixed-up bottle? Re-sample; the sample is kept out of the trend until confirmed.',
          expected,
        );
        break;
      }
    }
  }

  if (ctx.continuesCharge) {
    const deviating: string[] = [];
    let compared = 0;
    let first: Measurand | undefined;
    for (const m of ADDITIVES) {
      const history = track.additives[m];
      const x = valueOf(s.readings[m]);
      if (history === undefined || history.length < 3 || x === undefined) continue;
      const ref = median(history);
      if (Math.max(ref, x) < 100) continue;
      compared += 1;
      if (Math.abs(x - ref) > ADDITIVE_SHARE * Math.max(ref, 100)) {
        deviating.push(`${m} ${quantity(m, x)} against ${quantity(m, ref)}`);
        first ??= m;
      }
    }
    if (deviating.length >= 2 && deviating.length * 2 >= compared) {
      add(
        'foreign-oil',
        first!,
        'caution',
        true,
        deviating.length,
        'elements',
        `Additive elements do not match this charge's oil (${deviating.join(', ')}): another unit's sample, or a top-up with a different oil. ` +
          'Check the label and the top-up oil; the sample is kept out of the trend until confirmed.',
      );
    }
  }
  return { findings, inDoubt };
}

/**
 * The track after a sample: an accepted one becomes the reference; every sample's fingerprint is kept; a sample in
 * doubt is kept beside the reference as the level a next sample may agree with (`doubted`; `otherOil`: it was in
 * doubt for its additive elements).
 */
export function advanceSampling(track: SamplingTrack, sample: Sample, accepted: boolean, newCharge: boolean, otherOil = false): SamplingTrack {
  const fp = fingerprint(sample);
  const fingerprints = fp === undefined ? track.fingerprints : [...track.fingerprints, { sampleId: sample.sampleId, fp }].slice(-FINGERPRINTS_KEPT);
  if (!accepted) {
    const { doubted: _, ...reference } = track;
    // A sample of another oil starts the reference of its oil afresh, should the next sample show the same oil.
    const asAccepted = advanceSampling(otherOil ? { ...reference, additives: {} } : reference, sample, true, false);
    return { ...reference, fingerprints, doubted: { track: asAccepted, ...(sample.oilHours !== undefined && { oilHours: sample.oilHours }) } };
  }
  const wear: Partial<Record<Measurand, number>> = {};
  for (const m of WEAR) {
    const v = valueOf(sample.readings[m]);
    if (v !== undefined) wear[m] = v;
  }
  const additives: Partial<Record<Measurand, number[]>> = newCharge && !sameOil(track.additives, sample) ? {} : { ...(track.additives as Partial<Record<Measurand, number[]>>) };
  for (const m of ADDITIVES) {
    const v = valueOf(sample.readings[m]);
    if (v !== undefined) additives[m] = [...(additives[m] ?? []), v].slice(-ADDITIVE_REFERENCE);
  }
  return {
    last: {
      sampleId: sample.sampleId,
      ...(sample.oilHours !== undefined && { oilHours: sample.oilHours }),
      ...(sample.unitHours !== undefined && { unitHours: sample.unitHours }),
      wear,
    },
    fingerprints,
    additives,
  };
}

/**
 * Whether the first sample of a new charge shows the oil of the reference (every additive element compared within
 * ADDITIVE_SHARE): then the reference carries over the drain, so that a short charge is judged from its second sample
 * on; a charge of another oil starts a reference of its own.
 */
function sameOil(reference: SamplingTrack['additives'], sample: Sample): boolean {
  let compared = 0;
  for (const m of ADDITIVES) {
    const history = reference[m];
    const x = valueOf(sample.readings[m]);
    if (history === undefined || history.length === 0 || x === undefined) continue;
    const ref = median(history);
    if (Math.max(ref, x) < 100) continue;
    if (Math.abs(x - ref) > ADDITIVE_SHARE * Math.max(ref, 100)) return false;
    compared += 1;
  }
  return compared > 0;
}

/** Readings that identify a bottle: at least four, three of them measured above zero. */
function fingerprint(s: Sample): string | undefined {
  const entries = Object.entries(s.readings).sort(([a], [b]) => (a < b ? -1 : 1));
  const measured = entries.filter(([, r]) => r !== undefined && r.kind === 'value' && r.value > 0).length;
  if (entries.length < 4 || measured < 3) return undefined;
  return JSON.stringify(entries);
}

/** A reading's value, or the bound of a "<x" reading (the value is at most x); undefined for ">x" and codes. */
function belowOrAt(r: Reading | undefined): number | undefined {
  if (r === undefined) return undefined;
  if (r.kind === 'value') return r.value;
  return r.kind === 'censored' && r.bound === 'below' ? r.limit : undefined;
}

function valueOf(r: Reading | undefined): number | undefined {
  if (r === undefined || r.kind === 'code') return undefined;
  return r.kind === 'value' ? r.value : r.limit;
}

/**
 * The measurand a sample-wide finding is filed under (its key, stored data): not what the finding is about, which is
 * the whole sample (`subjectOf` in domain/finding.ts says so wherever the finding is shown).
 */
function firstMeasurand(s: Sample): Measurand {
  const names = Object.keys(s.readings) as Measurand[];
  return names.find((m) => MEASURANDS[m].kind === 'wear') ?? names.sort()[0]!;
}

function median(values: readonly number[]): number {
  const sorted = [...values].sort((a, b) => a - b);
  const mid = sorted.length >> 1;
  return sorted.length % 2 === 1 ? sorted[mid]! : (sorted[mid - 1]! + sorted[mid]!) / 2;
}
