/**
 * The result event (design brief §4) and the normalised sample the analysis core works on.
 * The zod schema is the single source: the published JSON Schema in `schemas/` is generated from it.
 */
import { z } from 'zod';
import { isMeasurand, MEASURAND_NAMES, type Measurand } from './measurands.ts';
import { parseReading, readingJsonSchema, type Reading } from './reading.ts';

/** Characters a name may hold after its first, which is a letter or digit; and "/", except in unit and component names. */
const NAME_CHARS = String.raw`\p{L}\p{N} ._:#()+\-`;
const MAX_NAME_LENGTH = 80;

/**
 * A name as the published JSON Schema states it: what the server takes before it trims, so surrounding white space
 * (which trimming removes, and JSON Schema's `\s` matches the same characters as ECMAScript's trim) around a name
 * of at most 80 characters that starts with a letter or digit.
 */
const namePattern = (slash: boolean) => String.raw`^\s*[\p{L}\p{N}][${NAME_CHARS}${slash ? '/' : ''}]{0,${MAX_NAME_LENGTH - 1}}\s*$`;

/**
 * Names travel into e-mail headers, Redis keys and URLs: printable characters only, bounded length. Trimmed and in
 * Unicode normal form NFKC, so that "PS1 " and "ＰＳ1" (full-width) are the unit PS1, not new units that read like it.
 * The published schema states the same with surrounding white space allowed (namePattern): a name with a leading or
 * trailing space is taken, as the name without it.
 */
const identifier = (what: string, slash = true) =>
  z
    .string({ error: (i) => (i.input === undefined ? `${what} is required (missing or empty)` : `${what} must be text`) })
    .trim()
    .normalize('NFKC')
    // An empty name gets one plain reason, not the character rule as well.
    .min(1, { error: `${what} must not be empty`, abort: true })
    .max(MAX_NAME_LENGTH, `${what} must be at most ${MAX_NAME_LENGTH} characters`)
    .regex(new RegExp(`^[\\p{L}\\p{N}][${NAME_CHARS}/]*$`, 'u'), `${what} may hold letters, digits, spaces and . _ : # ( ) + - / only, starting with a letter or digit`)
    // The lengths are counted after trimming, which the pattern says; minLength and maxLength would count before it.
    .meta({ pattern: namePattern(slash), minLength: undefined, maxLength: undefined });

/**
 * Unit and component names make up a component's identity (`unit/component`) in keys, incident ids and URLs,
 * so they may not contain the slash that separates them: otherwise "Line 2" + "Pump 3/gearbox" and
 * "Line 2/Pump 3" + "gearbox" would be one history.
 */
const partName = (what: string) => identifier(what, false).refine((v) => !v.includes('/'), `${what} may not contain "/" (it separates unit and component in incident ids and keys)`);

const hours = (what: string) => z.number().finite().min(0, `${what} must not be negative`).max(1e7, `${what} is implausibly large`);

const readingValue = z.union([z.number(), z.string().max(40, 'a reading string must be at most 40 characters')], {
  error: 'expected a finite number, a censored value such as "<1", or an ISO 4406 code such as "18/16/13"',
});

/** The earliest sampling time taken: 1970-01-01T00:00:00Z. */
export const EARLIEST_SAMPLED_AT = Date.UTC(1970, 0, 1);

/** The start of the reason given for a sampledAt ahead of the server clock (counted as its own kind of rejection). */
export const FUTURE_REASON = 'lies in the future';

/** Most entries one record's readings may hold: one per measurand of the catalogue. */
export const MAX_READINGS = MEASURAND_NAMES.length;

/** Longest measurand name a record may give; a longer one is echoed in a problem's path cut to this length. */
const MAX_NAME_CHARS = 40;

export const ResultEventSchema = z
  .object({
    sampleId: identifier('sampleId').describe('The laboratory sample number; with revision, the identity of a result.'),
    revision: z.number().int().min(0).max(1000).default(0).describe('Re-issued results of one sample carry a higher revision; the highest wins.'),
    unit: partName('unit').describe('The machine or asset.'),
    component: partName('component').describe('The oil-wetted compartment of the unit (one sample point).'),
    group: identifier('group').optional().describe('The like-for-like population; configuration rules or the component name assign one when absent.'),
    sampledAt: z
      .iso.datetime({
        offset: true,
        error: (i) => (i.input === undefined ? 'sampledAt is required (missing or empty)' : 'sampledAt must be an ISO 8601 date-time with a time zone, such as 2026-03-01T08:00:00Z'),
      })
      // A year typed wrong (0202, 1026) would sort first in the history and start its baseline.
      .refine((v) => !(Date.parse(v) < EARLIEST_SAMPLED_AT), `sampledAt lies before ${new Date(EARLIEST_SAMPLED_AT).toISOString().slice(0, 10)}: no used-oil sample is that old (a typing slip in the year?)`)
      // The year from 1970 on, as far as a pattern can say it (EARLIEST_SAMPLED_AT); the description names the rest.
      .meta({ allOf: [{ pattern: '^(?:19[7-9][0-9]|[2-9][0-9]{3})-' }] })
      .describe('When the oil was drawn: from 1970-01-01T00:00:00Z on (a time on 1970-01-01 whose offset puts it before then is refused by the server too).'),
    unitHours: hours('unitHours').optional().describe("Hours on the unit's meter."),
    oilHours: hours('oilHours').optional().describe('Hours on the current oil charge.'),
    oilChanged: z.boolean({ error: 'oilChanged must be true or false' }).default(false).describe('The oil was changed at this sample (this sample is on a new charge).'),
    componentChanged: z.boolean({ error: 'componentChanged must be true or false' }).default(false).describe('The component was replaced or overhauled at this sample: running-in starts again.'),
    topUpLitres: z.number().finite().min(0, 'topUpLitres must not be negative').max(1e6).default(0).describe('Make-up oil added since the previous sample, in litres.'),
    lab: identifier('lab').optional().describe('The reporting laboratory.'),
    readings: z
      .record(z.string().max(MAX_NAME_CHARS), readingValue, { error: (i) => (i.code === 'invalid_key' ? `a measurand name is at most ${MAX_NAME_CHARS} characters` : undefined) })
      .refine((r) => Object.keys(r).length > 0, 'readings must hold at least one measurand')
      .refine((r) => Object.keys(r).length <= MAX_READINGS, { error: (i) => tooManyReadings(Object.keys(i.input as object).length) })
      // The catalogue's names (case-sensitive: "fe" and "TBN" are unknown) and each one's forms, which parseResultEvent
      // checks after the shape; the published schema states them here.
      .meta({
        propertyNames: { enum: MEASURAND_NAMES },
        properties: Object.fromEntries(MEASURAND_NAMES.map((m) => [m, readingJsonSchema(m)])),
        additionalProperties: undefined,
        minProperties: 1,
        maxProperties: MAX_READINGS,
      })
      .describe(
        `Readings by measurand (names of the catalogue, case-sensitive): a number, a censored string such as "<1", or for iso4406 a code "18/16/13". Known measurands: ${MEASURAND_NAMES.join(', ')}.`,
      ),
  })
  .strict()
  .describe(
    'One lab result. The server checks more than this schema states: a reading written as a string (a number or a censored bound such as "<5000") within the bound of its unit, a number string that is finite; names counted and checked after trimming and Unicode NFKC normalisation (a character NFKC turns into one outside the allowed set is refused); and a sampledAt on 1970-01-01 with an offset that puts it before 1970-01-01T00:00:00Z. The schema states names as sent: a name written with compatibility characters that NFKC turns into allowed ones (full-width punctuation such as "－") is taken by the server in its normal form.',
  );

export type ResultEvent = z.input<typeof ResultEventSchema>;

/** A validated, normalised lab result. */
export interface Sample {
  readonly sampleId: string;
  readonly revision: number;
  readonly unit: string;
  readonly component: string;
  readonly group?: string;
  readonly sampledAt: string;
  /** sampledAt in epoch milliseconds, for ordering. */
  readonly time: number;
  readonly unitHours?: number;
  readonly oilHours?: number;
  readonly oilChanged: boolean;
  readonly componentChanged: boolean;
  readonly topUpLitres: number;
  readonly lab?: string;
  readonly readings: Readonly<Partial<Record<Measurand, Reading>>>;
}

export interface FieldIssue {
  /** Dotted path of the offending field, e.g. `readings.Fe`; empty for the record as a whole. */
  readonly path: string;
  readonly reason: string;
}

export type ParsedEvent = { ok: true; sample: Sample } | { ok: false; issues: FieldIssue[] };

const FIELDS = new Set(Object.keys(ResultEventSchema.shape));
const WITHOUT_READINGS = ResultEventSchema.omit({ readings: true });
/** Unknown fields named in the reason; the rest are counted. */
const UNKNOWN_FIELDS_NAMED = 5;

function tooManyReadings(count: number): string {
  return `readings hold ${count} entries, more than the ${MAX_READINGS} measurands of the catalogue: each measurand may appear once (see the measurand catalogue in the README)`;
}

/** A name as a problem echoes it: cut to MAX_NAME_CHARS characters, so that the answer stays small whatever was sent. */
function shown(name: string): string {
  return name.length > MAX_NAME_CHARS ? `${name.slice(0, MAX_NAME_CHARS)}…` : name;
}

const isPlainObject = (v: unknown): v is Record<string, unknown> => typeof v === 'object' && v !== null && !Array.isArray(v);

/**
 * Validates one event. Every problem is reported with its field path; nothing is guessed or dropped. The problems
 * of a record are bounded whatever it holds: unknown fields are named (the first few) and counted in one problem, and
 * readings with more entries than the catalogue has measurands are refused on their count without judging each.
 */
export function parseResultEvent(input: unknown): ParsedEvent {
  let record = input;
  const early: FieldIssue[] = [];
  let schema: z.ZodType = ResultEventSchema;
  if (isPlainObject(input)) {
    const names = Object.keys(input);
    const known = [...FIELDS].filter((f) => Object.hasOwn(input, f));
    const unknownCount = names.length - known.length;
    if (unknownCount > 0) {
      const named: string[] = [];
      for (let i = 0; i < names.length && named.length < UNKNOWN_FIELDS_NAMED; i++) if (!FIELDS.has(names[i]!)) named.push(`"${shown(names[i]!)}"`);
      const more = unknownCount > named.length ? ` and ${unknownCount - named.length} more` : '';
      early.push({ path: '', reason: `unknown field${unknownCount > 1 ? 's' : ''} ${named.join(', ')}${more} (a result event holds ${[...FIELDS].join(', ')})` });
      record = Object.fromEntries(known.map((f) => [f, input[f]]));
    }
    const readings = (record as { readings?: unknown }).readings;
    if (isPlainObject(readings)) {
      const count = Object.keys(readings).length;
      if (count > MAX_READINGS) {
        early.push({ path: 'readings', reason: tooManyReadings(count) });
        const { readings: _refused, ...rest } = record as Record<string, unknown>;
        record = rest;
        schema = WITHOUT_READINGS;
      }
    }
  }
  const parsed = schema.safeParse(record);
  if (!parsed.success || early.length > 0) {
    // Every problem of the record at once: the readings are judged too, so that one correction round is enough.
    const issues = [...early, ...(parsed.error?.issues ?? []).map((i) => ({ path: i.path.map((p) => shown(String(p))).join('.'), reason: i.message }))];
    const raw = (record as { readings?: unknown } | undefined)?.readings;
    if (schema === ResultEventSchema && isPlainObject(raw)) {
      const reported = new Set(issues.map((i) => i.path));
      for (const issue of readingIssues(raw)) if (!reported.has(issue.path)) issues.push(issue);
    }
    return { ok: false, issues };
  }
  const e = parsed.data as z.output<typeof ResultEventSchema>;
  const issues: FieldIssue[] = [];
  const readings: Partial<Record<Measurand, Reading>> = {};
  for (const [name, raw] of Object.entries(e.readings)) {
    if (!isMeasurand(name)) {
      issues.push({ path: `readings.${name}`, reason: 'unknown measurand (see the measurand catalogue in the README)' });
      continue;
    }
    const r = parseReading(raw, name);
    if (r.ok) readings[name] = r.reading;
    else issues.push({ path: `readings.${name}`, reason: r.reason });
  }
  if (issues.length > 0) return { ok: false, issues };
  const sample: Sample = {
    sampleId: e.sampleId,
    revision: e.revision,
    unit: e.unit,
    component: e.component,
    sampledAt: new Date(e.sampledAt).toISOString(),
    time: Date.parse(e.sampledAt),
    oilChanged: e.oilChanged,
    componentChanged: e.componentChanged,
    topUpLitres: e.topUpLitres,
    readings,
    ...(e.group !== undefined && { group: e.group }),
    ...(e.unitHours !== undefined && { unitHours: e.unitHours }),
    ...(e.oilHours !== undefined && { oilHours: e.oilHours }),
    ...(e.lab !== undefined && { lab: e.lab }),
  };
  return { ok: true, sample };
}

/** The measurand and value problems of a readings object, as parseResultEvent reports them. */
function readingIssues(readings: Record<string, unknown>): FieldIssue[] {
  const issues: FieldIssue[] = [];
  for (const [name, raw] of Object.entries(readings)) {
    if (!isMeasurand(name)) issues.push({ path: `readings.${shown(name)}`, reason: 'unknown measurand (see the measurand catalogue in the README)' });
    else if (typeof raw === 'number' || typeof raw === 'string') {
      const r = parseReading(raw, name);
      if (!r.ok) issues.push({ path: `readings.${name}`, reason: r.reason });
    }
  }
  return issues;
}

/** The identity of a component's history. */
export function componentKey(s: { unit: string; component: string }): string {
  return `${s.unit}/${s.component}`;
}
