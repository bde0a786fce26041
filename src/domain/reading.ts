/**
 * One lab reading. Results below (or above) the method's reporting range are kept as censored values,
 * never silently turned into numbers: "<1" means "below 1", not 0 and not 1.
 */
import { isMeasurand, MEASURANDS, type Measurand } from './measurands.ts';

export type Reading =
  | { readonly kind: 'value'; readonly value: number }
  | { readonly kind: 'censored'; readonly bound: 'below' | 'above'; readonly limit: number }
  | { readonly kind: 'code'; readonly code: Iso4406Code };

/** An ISO 4406 code: scale numbers for ≥4, ≥6 and ≥14 µm(c); a microscope count (ISO 4407) has no ≥4 part. */
export interface Iso4406Code {
  readonly p4: number | null;
  readonly p6: number;
  readonly p14: number;
}

/**
 * The bound of earlier versions for every measurand alike. Still what a stored reading is read back with: it was
 * accepted under it, and a history must stay readable. New readings are held to their unit's bound (below).
 */
export const MAX_READING = 1e9;

/**
 * The largest plausible reading in each unit of the measurand catalogue. More is a typing or unit error (ppm written
 * as ppb, a fraction as ppm), and near the float limit the rules' arithmetic overflows. Each bound lies above anything
 * a lab reports in that unit, so that no true reading is refused:
 * - `%` (fuel, soot, glycol): 100, the whole sample.
 * - `ppm` (elements, water): 1 000 000, the whole sample.
 * - `per mL` (particle counts): 10 000 000, four times the top of ISO 4406's highest scale number, 28 (2 500 000 per mL).
 * - `mm²/s` (viscosity): 100 000, some thirty times the thickest ISO 3448 grade (VG 3200: at most 3 520 mm²/s at 40 °C).
 * - `mg KOH/g` (base and acid number): 1 000, the alkalinity of pure potassium hydroxide; the most alkaline oils,
 *   marine cylinder oils, are near 140 (common practice).
 * - `A/cm` (FTIR oxidation, nitration): 1 000; a spectrometer reads absorbances up to about 3, which over a 0.1 mm
 *   transmission cell is 300 A/cm (from memory).
 * - `index` (PQ, ferrous debris): 100 000; the index has no fixed top, and the worst samples read a few thousand
 *   (from memory).
 * - `code` (ISO 4406): never a number; the code's scale numbers are checked on their own (0 to 28).
 */
export const MAX_BY_UNIT: Readonly<Record<string, number>> = {
  '%': 100,
  ppm: 1e6,
  'per mL': 1e7,
  'mm²/s': 1e5,
  'mg KOH/g': 1000,
  'A/cm': 1000,
  index: 1e5,
  code: 28,
};

/**
 * The largest plausible reading of a measurand, in its unit (MAX_READING for a name outside the catalogue, or a unit
 * without a bound — a test keeps every unit of the catalogue bound).
 */
export function maxReading(measurand: string): number {
  return (isMeasurand(measurand) ? MAX_BY_UNIT[MEASURANDS[measurand].unit] : undefined) ?? MAX_READING;
}

export interface ParseReadingOptions {
  /** The largest number taken; default the measurand's `maxReading`. Stored readings are read back with MAX_READING. */
  readonly max?: number;
}

const CENSORED = /^\s*([<>])\s*=?\s*(\d+(?:\.\d+)?)\s*$/;
const NUMBER = /^\s*[-+]?\d+(?:\.\d+)?(?:[eE][-+]?\d+)?\s*$/;
const ISO_CODE = /^\s*(-|\d{1,2})\s*\/\s*(\d{1,2})\s*\/\s*(\d{1,2})\s*$/;

export type ParsedReading = { ok: true; reading: Reading } | { ok: false; reason: string };

/** An ISO 4406 scale number as the JSON Schema states it: 0 to 28, one or two digits. */
const SCALE_NUMBER = String.raw`(?:[0-9]|[01][0-9]|2[0-8])`;

/**
 * What a reading of the measurand may be, as JSON Schema 2020-12 states it for the published result-event schema:
 * the same forms parseReading takes (its patterns, the unit's bound for a number), except what a pattern cannot
 * compare: the bound of a number or a censored bound written as a string (the server checks it). A number is never
 * an ISO 4406 code; a numeric string may be negative only as zero ("-0"), as a negative reading is refused.
 */
export function readingJsonSchema(measurand: Measurand): Record<string, unknown> {
  if (measurand === 'iso4406') {
    return { type: 'string', maxLength: 40, pattern: String.raw`^\s*(?:-|${SCALE_NUMBER})\s*/\s*${SCALE_NUMBER}\s*/\s*${SCALE_NUMBER}\s*$` };
  }
  const max = maxReading(measurand);
  return {
    anyOf: [
      { type: 'number', minimum: 0, maximum: max },
      {
        type: 'string',
        maxLength: 40,
        pattern: String.raw`^\s*(?:[<>]\s*=?\s*\d+(?:\.\d+)?|\+?\d+(?:\.\d+)?(?:[eE][-+]?\d+)?|-0+(?:\.0+)?(?:[eE][-+]?\d+)?)\s*$`,
      },
    ],
  };
}

/** Parses a reading as labs send it: a number, a censored string such as "<1", or an ISO 4406 code "18/16/13". */
export function parseReading(raw: unknown, measurand: string, options: ParseReadingOptions = {}): ParsedReading {
  const max = options.max ?? maxReading(measurand);
  const unit = isMeasurand(measurand) ? ` ${MEASURANDS[measurand].unit}` : '';
  if (typeof raw === 'number') {
    // A bare number is no cleanliness code; accepted, it would be stored and never judged.
    if (measurand === 'iso4406') return { ok: false, reason: `expected an ISO 4406 code such as "18/16/13" or "-/16/13", got the number ${raw}` };
    if (!Number.isFinite(raw)) return { ok: false, reason: 'must be a finite number' };
    if (raw < 0) return { ok: false, reason: `must not be negative (got ${raw})` };
    if (raw > max) return { ok: false, reason: `is implausibly large (got ${raw}, at most ${max}${unit})` };
    return { ok: true, reading: { kind: 'value', value: raw } };
  }
  if (typeof raw !== 'string') return { ok: false, reason: `expected a number or a string such as "<1", got ${describe(raw)}` };
  if (measurand === 'iso4406') {
    const m = ISO_CODE.exec(raw);
    if (!m) return { ok: false, reason: `expected an ISO 4406 code such as "18/16/13" or "-/16/13", got "${clip(raw)}"` };
    const [p4, p6, p14] = [m[1] === '-' ? null : Number(m[1]), Number(m[2]), Number(m[3])];
    if ([p4 ?? 0, p6, p14].some((c) => c > 28)) return { ok: false, reason: `ISO 4406 scale numbers run from 0 to 28, got "${clip(raw)}"` };
    return { ok: true, reading: { kind: 'code', code: { p4, p6, p14 } } };
  }
  const c = CENSORED.exec(raw);
  if (c) {
    const limit = Number(c[2]);
    if (limit > max) return { ok: false, reason: `is implausibly large (got "${clip(raw)}", at most ${max}${unit})` };
    return { ok: true, reading: { kind: 'censored', bound: c[1] === '<' ? 'below' : 'above', limit } };
  }
  if (NUMBER.test(raw)) return parseReading(Number(raw), measurand, options);
  return { ok: false, reason: `expected a number or a censored value such as "<1" or ">5000", got "${clip(raw)}"` };
}

/** The number to plot or compare; censored readings give their bound, which callers must treat as a bound. */
export function readingNumber(r: Reading): number | undefined {
  if (r.kind === 'value') return r.value;
  if (r.kind === 'censored') return r.limit;
  return undefined;
}

export function formatReading(r: Reading): string {
  if (r.kind === 'value') return String(r.value);
  if (r.kind === 'censored') return `${r.bound === 'below' ? '<' : '>'}${r.limit}`;
  return `${r.code.p4 ?? '-'}/${r.code.p6}/${r.code.p14}`;
}

function describe(v: unknown): string {
  if (v === null) return 'null';
  if (Array.isArray(v)) return 'an array';
  return typeof v;
}

function clip(s: string): string {
  return s.length > 40 ? `${s.slice(0, 40)}…` : s;
}
