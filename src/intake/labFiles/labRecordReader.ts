/**
 * Turns the rows of a lab file into result events as the mapping says, and validates each one as every
 * other intake path does. Wide layout: one row per sample. Long layout: one row per measurand, the rows of a
 * sample next to each other (grouped by the sampleId column). Every problem names the row, the column and
 * the reason; a problem in the header or the mapping stops the file (InputError) before anything is read.
 */
import { InputError } from '../../domain/errors.ts';
import type { FieldIssue, ParsedEvent, Sample } from '../../domain/event.ts';
import { MEASURAND_NAMES, type Measurand } from '../../domain/measurands.ts';
import { readDate, timeZoneProblem, toEpoch, wallClockOfCell } from './dates.ts';
import type { FieldSource, LabMapping, MappedField } from './mappingSchema.ts';
import { parseCensored, parseNumber, type NumberStyle } from './numbers.ts';
import type { Cell, SourceRow } from './rowSources.ts';
import { conversionFor } from './units.ts';

/** A problem with one cell (or one record, without a column). */
export interface LabIssue {
  readonly row: number;
  readonly column?: string;
  /** The event field concerned, e.g. `readings.Fe`. */
  readonly field?: string;
  readonly reason: string;
}

export type LabRecord =
  | { readonly status: 'accepted'; readonly row: number; readonly event: Record<string, unknown>; readonly sample: Sample }
  | { readonly status: 'rejected'; readonly row: number; readonly sampleId?: string; readonly issues: readonly LabIssue[] };

export interface LabRecordReaderOptions {
  /** Validates a mapped event (src/intake/validate.ts with the clock). */
  readonly validate: (event: unknown) => ParsedEvent;
}

const TEXT_FIELDS = new Set<MappedField>(['sampleId', 'unit', 'component', 'group', 'lab']);
const NUMBER_FIELDS = new Set<MappedField>(['unitHours', 'oilHours', 'topUpLitres', 'revision']);
const TRUE_WORDS = new Set(['true', 'yes', 'y', '1', 'x']);
const FALSE_WORDS = new Set(['false', 'no', 'n', '0']);

interface Origin {
  readonly row: number;
  readonly column?: string;
}

/** One sample being put together: the event so far, where each field came from, and the problems found. */
interface Draft {
  readonly row: number;
  readonly event: Record<string, unknown>;
  readonly readings: Record<string, unknown>;
  readonly origin: Map<string, Origin>;
  readonly issues: LabIssue[];
  charge?: { value: string; number?: number; origin: Origin };
}

export class LabRecordReader {
  private readonly style: NumberStyle;
  private readonly aliases = new Map<string, { measurand: Measurand; unit?: string }>();
  private readonly ignored: Set<string>;
  /** Last accepted charge per unit/component. */
  private readonly charges = new Map<string, { value: string; number?: number }>();
  private header: string[] = [];
  private index = new Map<string, number>();

  constructor(
    private readonly mapping: LabMapping,
    private readonly options: LabRecordReaderOptions,
  ) {
    this.style = { decimal: mapping.decimal, thousands: mapping.thousands };
    for (const entry of mapping.measurands) {
      const conversion = conversionFor(entry.measurand, entry.unit);
      if (!conversion.ok) throw new InputError(`mapping: measurands (${entry.measurand}): ${conversion.reason}`);
      for (const name of entry.names) this.aliases.set(name.toLowerCase(), { measurand: entry.measurand, ...(entry.unit !== undefined && { unit: entry.unit }) });
    }
    for (const m of MEASURAND_NAMES) if (!this.aliases.has(m.toLowerCase())) this.aliases.set(m.toLowerCase(), { measurand: m });
    this.ignored = new Set(mapping.ignore.map((c) => c.toLowerCase()));
    const zone = timeZoneProblem(mapping.sampledAt.timeZone);
    if (zone !== undefined) throw new InputError(`mapping: sampledAt.timeZone: ${zone}`);
    if (mapping.layout === 'long' && !('column' in mapping.fields.sampleId!)) throw new InputError('mapping: fields.sampleId: the long layout groups rows by the sampleId column, so it must be { column: NAME }');
  }

  async *records(rows: AsyncIterable<SourceRow>): AsyncIterable<LabRecord> {
    let pending: { key: string; draft: Draft } | undefined;
    const seenKeys = new Set<string>();
    for await (const r of rows) {
      if ('error' in r) throw new InputError(r.row > 0 ? `row ${r.row}: ${r.error}` : r.error);
      if (r.row < this.mapping.headerRow) continue;
      if (this.header.length === 0) {
        if (r.cells.every((c) => c === null)) continue;
        this.readHeader(r.row, r.cells);
        continue;
      }
      if (r.cells.every((c) => c === null)) continue;
      if (this.mapping.layout === 'wide') {
        const draft = this.newDraft(r.row, r.cells);
        this.wideReadings(draft, r.cells);
        yield this.finish(draft);
        continue;
      }
      const key = this.sampleKey(r.cells);
      if (pending !== undefined && pending.key !== key) {
        yield this.finish(pending.draft);
        pending = undefined;
      }
      if (pending === undefined) {
        const draft = this.newDraft(r.row, r.cells);
        if (key !== '' && seenKeys.has(key)) {
          const sampleId = text(this.cell(r.cells, this.fieldColumn('sampleId')!)) ?? '';
          draft.issues.push({ row: r.row, column: this.fieldColumn('sampleId')!, reason: `the rows of sample "${sampleId}" are not next to each other; sort the file by sample (and revision)` });
        }
        if (key !== '') seenKeys.add(key);
        pending = { key, draft };
      }
      this.longReading(pending.draft, r.row, r.cells);
    }
    if (this.header.length === 0) throw new InputError(`no header row found (expected at row ${this.mapping.headerRow})`);
    if (pending !== undefined) yield this.finish(pending.draft);
  }

  private readHeader(row: number, cells: readonly Cell[]): void {
    const names = cells.map((c) => (c === null ? '' : String(c).trim()));
    const twice = names.find((n, i) => n !== '' && names.indexOf(n) !== i);
    if (twice !== undefined) throw new InputError(`row ${row}: column "${twice}" appears twice in the header; nothing was read`);
    this.header = names;
    this.index = new Map(names.map((n, i) => [n, i] as const).filter(([n]) => n !== ''));
    const need = (column: string, where: string) => {
      if (!this.index.has(column)) throw new InputError(`mapping ${where}: column "${column}" is not in the header (row ${row}); the header has ${names.filter((n) => n !== '').map((n) => `"${n}"`).join(', ')}`);
    };
    for (const [field, src] of Object.entries(this.mapping.fields) as [MappedField, FieldSource | undefined][]) if (src !== undefined && 'column' in src) need(src.column, `fields.${field}`);
    need(this.mapping.sampledAt.column, 'sampledAt.column');
    if (this.mapping.sampledAt.timeColumn !== undefined) need(this.mapping.sampledAt.timeColumn, 'sampledAt.timeColumn');
    if (this.mapping.charge !== undefined) need(this.mapping.charge.column, 'charge.column');
    if (this.mapping.long !== undefined && this.mapping.layout === 'long') {
      need(this.mapping.long.measurandColumn, 'long.measurandColumn');
      need(this.mapping.long.valueColumn, 'long.valueColumn');
      if (this.mapping.long.unitColumn !== undefined) need(this.mapping.long.unitColumn, 'long.unitColumn');
      return;
    }
    const used = new Set(this.usedColumns());
    const unmapped = names.filter((n) => n !== '' && !used.has(n) && !this.ignored.has(n.toLowerCase()) && !this.aliases.has(n.toLowerCase()));
    if (unmapped.length > 0) {
      throw new InputError(`row ${row}: ${unmapped.map((n) => `column "${n}"`).join(', ')} ${unmapped.length === 1 ? 'is' : 'are'} not mapped; add ${unmapped.length === 1 ? 'it' : 'them'} to a measurand's names or to ignore in the mapping`);
    }
    // Two columns read as one measurand: the later would silently overwrite the earlier in every row.
    const columnOf = new Map<Measurand, string>();
    for (const n of names) {
      if (n === '' || used.has(n) || this.ignored.has(n.toLowerCase())) continue;
      const m = this.aliases.get(n.toLowerCase())!.measurand;
      const first = columnOf.get(m);
      if (first !== undefined) throw new InputError(`row ${row}: columns "${first}" and "${n}" are both ${m}; ignore one of them in the mapping, nothing was read`);
      columnOf.set(m, n);
    }
  }

  /**
   * The rows of one sample in the long layout: the same sampleId and, where the mapping has them as columns, the same
   * revision, unit and component, so that a sample and its correction in one file are two samples, not one whose
   * readings appear twice. Empty when the row has no sampleId.
   */
  private sampleKey(cells: readonly Cell[]): string {
    const sampleId = text(this.cell(cells, this.fieldColumn('sampleId')!)) ?? '';
    if (sampleId === '') return '';
    const parts = (['revision', 'unit', 'component'] as const).map((f) => {
      const column = this.fieldColumn(f);
      return column === undefined ? '' : (text(this.cell(cells, column)) ?? '');
    });
    return JSON.stringify([sampleId, ...parts]);
  }

  private usedColumns(): string[] {
    const m = this.mapping;
    return [
      ...Object.values(m.fields).flatMap((s) => (s !== undefined && 'column' in s ? [s.column] : [])),
      m.sampledAt.column,
      ...(m.sampledAt.timeColumn !== undefined ? [m.sampledAt.timeColumn] : []),
      ...(m.charge !== undefined ? [m.charge.column] : []),
    ];
  }

  private fieldColumn(field: MappedField): string | undefined {
    const src = this.mapping.fields[field];
    return src !== undefined && 'column' in src ? src.column : undefined;
  }

  private cell(cells: readonly Cell[], column: string): Cell {
    const i = this.index.get(column);
    return i === undefined ? null : (cells[i] ?? null);
  }

  private newDraft(row: number, cells: readonly Cell[]): Draft {
    const draft: Draft = { row, event: {}, readings: {}, origin: new Map(), issues: [] };
    for (const [field, src] of Object.entries(this.mapping.fields) as [MappedField, FieldSource | undefined][]) {
      if (src === undefined) continue;
      if ('value' in src) {
        draft.event[field] = src.value;
        continue;
      }
      const origin = { row, column: src.column };
      draft.origin.set(field, origin);
      const c = this.cell(cells, src.column);
      if (c === null) continue;
      const v = this.fieldValue(field, c);
      if (v.ok) draft.event[field] = v.value;
      else draft.issues.push({ ...origin, field, reason: v.reason });
    }
    this.sampledAt(draft, cells);
    const charge = this.mapping.charge;
    if (charge !== undefined) {
      const origin = { row, column: charge.column };
      const c = this.cell(cells, charge.column);
      if (c === null) draft.issues.push({ ...origin, field: 'oilChanged', reason: 'the charge number is empty, so whether the oil was changed is unknown' });
      else {
        const value = typeof c === 'number' ? String(c) : String(c).trim();
        const n = typeof c === 'number' ? c : parseNumber(value, this.style);
        draft.charge = { value, ...(n !== undefined && { number: n }), origin };
      }
    }
    return draft;
  }

  private fieldValue(field: MappedField, c: Cell): { ok: true; value: unknown } | { ok: false; reason: string } {
    if (TEXT_FIELDS.has(field)) return { ok: true, value: c instanceof Date ? c.toISOString() : String(c).trim() };
    if (NUMBER_FIELDS.has(field)) {
      if (typeof c === 'number') return { ok: true, value: c };
      const n = typeof c === 'string' ? parseNumber(c, this.style) : undefined;
      return n === undefined ? { ok: false, reason: `expected a number (${styleWords(this.style)}), got ${gotWords(String(c))}` } : { ok: true, value: n };
    }
    if (typeof c === 'boolean') return { ok: true, value: c };
    const word = String(c).trim().toLowerCase();
    if (TRUE_WORDS.has(word)) return { ok: true, value: true };
    if (FALSE_WORDS.has(word)) return { ok: true, value: false };
    return { ok: false, reason: `expected yes/no, true/false, 1/0 or x, got "${clip(String(c))}"` };
  }

  private sampledAt(draft: Draft, cells: readonly Cell[]): void {
    const { column, timeColumn, formats, timeZone } = this.mapping.sampledAt;
    const origin = { row: draft.row, column };
    draft.origin.set('sampledAt', origin);
    const c = this.cell(cells, column);
    if (c === null) {
      draft.issues.push({ ...origin, field: 'sampledAt', reason: 'the sampling date is empty' });
      return;
    }
    let epoch: number | undefined;
    if (c instanceof Date) epoch = toEpoch(wallClockOfCell(c), timeZone);
    else {
      let t = String(c);
      if (timeColumn !== undefined) {
        const tc = this.cell(cells, timeColumn);
        const time = tc instanceof Date ? `${pad(tc.getUTCHours())}:${pad(tc.getUTCMinutes())}` : tc === null ? '' : String(tc).trim();
        t = time === '' ? t : `${t.trim()} ${time}`;
      }
      epoch = readDate(t, formats, timeZone);
      if (epoch === undefined) {
        draft.issues.push({ ...origin, field: 'sampledAt', reason: `"${clip(t)}" is not a date in the format ${formats.map((f) => `"${f}"`).join(' or ')}` });
        return;
      }
    }
    if (!Number.isFinite(epoch)) {
      draft.issues.push({ ...origin, field: 'sampledAt', reason: 'the sampling date is out of range' });
      return;
    }
    draft.event.sampledAt = new Date(epoch).toISOString();
  }

  private wideReadings(draft: Draft, cells: readonly Cell[]): void {
    const used = new Set(this.usedColumns());
    this.header.forEach((name, i) => {
      if (name === '' || used.has(name) || this.ignored.has(name.toLowerCase())) return;
      const alias = this.aliases.get(name.toLowerCase())!;
      this.addReading(draft, { row: draft.row, column: name }, alias.measurand, cells[i] ?? null, alias.unit);
    });
  }

  private longReading(draft: Draft, row: number, cells: readonly Cell[]): void {
    const long = this.mapping.long!;
    const nameCell = this.cell(cells, long.measurandColumn);
    if (nameCell === null) {
      draft.issues.push({ row, column: long.measurandColumn, reason: 'the measurand name is empty' });
      return;
    }
    const name = String(nameCell).trim();
    if (this.ignored.has(name.toLowerCase())) return;
    const alias = this.aliases.get(name.toLowerCase());
    if (alias === undefined) {
      draft.issues.push({ row, column: long.measurandColumn, reason: `"${clip(name)}" is no known measurand; add it to a measurand's names or to ignore in the mapping` });
      return;
    }
    const unitCell = long.unitColumn === undefined ? null : this.cell(cells, long.unitColumn);
    const unit = unitCell === null ? alias.unit : String(unitCell);
    const unitFrom = unitCell === null ? undefined : long.unitColumn;
    if (Object.hasOwn(draft.readings, alias.measurand)) {
      draft.issues.push({ row, column: long.measurandColumn, field: `readings.${alias.measurand}`, reason: `${alias.measurand} appears twice in this sample (first in row ${draft.origin.get(`readings.${alias.measurand}`)?.row})` });
      return;
    }
    this.addReading(draft, { row, column: long.valueColumn }, alias.measurand, this.cell(cells, long.valueColumn), unit, unitFrom);
  }

  private addReading(draft: Draft, origin: Origin, m: Measurand, c: Cell, unit: string | undefined, unitColumn?: string): void {
    if (c === null) return;
    const field = `readings.${m}`;
    draft.origin.set(field, origin);
    const conversion = conversionFor(m, unit);
    if (!conversion.ok) {
      draft.issues.push({ row: origin.row, column: unitColumn ?? origin.column!, field, reason: conversion.reason });
      return;
    }
    const f = conversion.factor;
    if (typeof c === 'number') {
      draft.readings[m] = tidy(c * f);
      return;
    }
    const t = String(c).trim();
    if (m === 'iso4406') {
      draft.readings[m] = t;
      return;
    }
    const censored = parseCensored(t, this.style);
    if (censored !== undefined) {
      draft.readings[m] = `${censored.sign}${tidy(censored.limit * f)}`;
      return;
    }
    const n = parseNumber(t, this.style);
    if (n === undefined) {
      draft.issues.push({ ...origin, field, reason: `expected a number (${styleWords(this.style)}) or a censored value such as "<1", got ${gotWords(t)}` });
      return;
    }
    draft.readings[m] = tidy(n * f);
  }

  private finish(draft: Draft): LabRecord {
    const event: Record<string, unknown> = { ...draft.event, readings: draft.readings };
    const sampleId = typeof event.sampleId === 'string' && event.sampleId !== '' && event.sampleId.length <= 80 ? event.sampleId : undefined;
    const chargeKey = typeof event.unit === 'string' && typeof event.component === 'string' ? `${event.unit}/${event.component}` : undefined;
    if (draft.charge !== undefined && chargeKey !== undefined) {
      const before = this.charges.get(chargeKey);
      const now = draft.charge;
      if (before === undefined) event.oilChanged = this.mapping.charge!.firstRow === 'changed';
      else if (before.number !== undefined && now.number !== undefined && now.number < before.number) {
        draft.issues.push({ ...now.origin, field: 'oilChanged', reason: `the charge number went backwards from ${before.value} to ${now.value} for ${chargeKey}; rows must be in sampling order` });
      } else event.oilChanged = before.value !== now.value;
      draft.origin.set('oilChanged', now.origin);
    }
    if (draft.issues.length > 0) return { status: 'rejected', row: draft.row, ...(sampleId !== undefined && { sampleId }), issues: draft.issues };
    const parsed = this.options.validate(event);
    if (!parsed.ok) return { status: 'rejected', row: draft.row, ...(sampleId !== undefined && { sampleId }), issues: parsed.issues.map((i) => this.locate(draft, i)) };
    if (draft.charge !== undefined && chargeKey !== undefined) this.charges.set(chargeKey, { value: draft.charge.value, ...(draft.charge.number !== undefined && { number: draft.charge.number }) });
    return { status: 'accepted', row: draft.row, event, sample: parsed.sample };
  }

  /** Names the cell behind an event field that validation refused. */
  private locate(draft: Draft, issue: FieldIssue): LabIssue {
    const parts = issue.path.split('.');
    const origin = draft.origin.get(parts.slice(0, 2).join('.')) ?? draft.origin.get(parts[0] ?? '');
    const constant = parts[0] !== undefined && isMappedField(parts[0]) && this.mapping.fields[parts[0]] !== undefined && 'value' in this.mapping.fields[parts[0]]!;
    return {
      row: origin?.row ?? draft.row,
      ...(origin?.column !== undefined && { column: origin.column }),
      ...(issue.path !== '' && { field: issue.path }),
      reason: constant ? `${issue.reason} (the constant given in the mapping)` : issue.reason,
    };
  }
}

function isMappedField(name: string): name is MappedField {
  return ['sampleId', 'unit', 'component', 'group', 'lab', 'unitHours', 'oilHours', 'topUpLitres', 'oilChanged', 'componentChanged', 'revision'].includes(name);
}

function text(c: Cell): string | undefined {
  return c === null ? undefined : String(c).trim();
}

function pad(n: number): string {
  return String(n).padStart(2, '0');
}

/** The cell as the user wrote it, and what a formula without a saved value needs. */
function gotWords(t: string): string {
  const got = `"${clip(t)}"`;
  return t.startsWith('=') ? `${got}, a formula without a saved value: open and save the workbook in a spreadsheet program so that its values are stored` : got;
}

function clip(s: string): string {
  return s.length > 40 ? `${s.slice(0, 40)}…` : s;
}

/** Converted readings keep 12 significant digits: 0.05 % is 500 ppm, not 500.00000000000006. */
function tidy(x: number): number {
  return Number(x.toPrecision(12));
}


/** How the mapping says numbers are written, for an error about a cell that is none. */
function styleWords(style: NumberStyle): string {
  return style.thousands === '' ? `decimal mark "${style.decimal}"` : `decimal mark "${style.decimal}", thousands "${style.thousands}" between groups of three digits`;
}
