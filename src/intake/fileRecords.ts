/**
 * Result files read as a stream of records with their line numbers, so that a file of any size is imported
 * in constant memory and every error names its line.
 *
 * CSV: a header row with the event field names; every other column is a reading named by its measurand
 * (`Fe` or `readings.Fe`); an empty cell means "no value" (no reading, or the field left out: oilChanged and
 * componentChanged then default to false). Numbers and the booleans true/false are converted; anything else is
 * passed on as text for validation to judge (so "no", "0" or "yes" in oilChanged is rejected, not guessed), and a
 * censored reading "<1" or an ISO 4406 code "18/16/13" stays as the lab wrote it.
 * JSONL: one JSON event per line; blank lines are skipped, and so is a UTF-8 byte-order mark before the first (as in CSV).
 */
import { createReadStream, type ReadStream } from 'node:fs';
import type { Readable } from 'node:stream';
import { parse } from 'csv-parse';
import { InputError } from '../domain/errors.ts';
import type { FieldIssue } from '../domain/event.ts';

export type FileFormat = 'csv' | 'jsonl';

export type SourceRecord =
  | { readonly line: number; readonly record: unknown }
  | { readonly line: number; readonly issues: readonly FieldIssue[]; readonly sampleId?: string };

/** Where a person reads how a lab's own export is mapped, named in every message that sends them there. */
export const LAB_FILES_SECTION = 'README, "Lab files as they come" and "Lab mapping reference"';

/** Workbook file names: read only through a lab mapping, which reads .xlsx. */
const SPREADSHEETS = new Set(['xlsx', 'xlsm', 'xls', 'ods']);

/**
 * The format of a plain result file (event field names as columns, or one JSON event per line): `--format` when
 * given, else the file name's ending. A spreadsheet is refused with the way it can be read (a lab mapping), and an
 * unknown `--format` with the formats accepted.
 */
export function formatOf(path: string, explicit?: string): FileFormat {
  const f = (explicit ?? path.split('.').pop() ?? '').toLowerCase();
  if (f === 'csv') return 'csv';
  if (f === 'jsonl' || f === 'ndjson') return 'jsonl';
  if (SPREADSHEETS.has(f)) {
    const convert = f === 'xlsx' ? '' : ' (saved as .xlsx or CSV first)';
    throw new InputError(
      `${path}: a lab's spreadsheet export needs a column mapping that says which column is what: wearshift import --map <mapping.yaml> ${path}${convert}; see ${LAB_FILES_SECTION}`,
    );
  }
  if (explicit !== undefined) {
    throw new InputError(`--format "${explicit}": unknown format; accepted: csv, jsonl (or ndjson); a lab's own CSV or .xlsx export is read with wearshift import --map <mapping.yaml> (${LAB_FILES_SECTION})`);
  }
  throw new InputError(`${path}: cannot tell the format from the name; use --format csv or --format jsonl, or wearshift import --map <mapping.yaml> for a lab's own export (${LAB_FILES_SECTION})`);
}

export function readRecordFile(path: string, format: FileFormat): { records: AsyncIterable<SourceRecord>; stream: ReadStream } {
  const stream = createReadStream(path);
  return { stream, records: stoppingAtReadError(path, stream, format === 'csv' ? csvRecords(stream) : jsonlRecords(stream)) };
}

/** A file that could not be read (on): the user's to fix, printed without a stack (exit 2). */
export class FileReadError extends InputError {}

/**
 * `records`, read from `stream`, until the file cannot be read on (a directory, a device, an I/O error): then an
 * InputError "FILE: cannot read the file: reason" (exit 2, no stack) after the records read before it, instead of an
 * unhandled stream error. The listener is on the stream from the start, so an error before the first record is caught too.
 */
export function stoppingAtReadError<T>(path: string, stream: Readable, records: AsyncIterable<T>): AsyncIterable<T> {
  let failure: Error | undefined;
  stream.on('error', (e: Error) => (failure ??= e));
  const refusal = () => new FileReadError(`${path}: cannot read the file: ${failure!.message}`);
  return (async function* () {
    try {
      yield* records;
    } catch (e) {
      if (failure === undefined) throw e;
    }
    if (failure !== undefined) throw refusal();
  })();
}

/**
 * The longest line or CSV record read, in bytes (characters for CSV): a result is a few hundred bytes; a line past
 * this is reported and skipped (JSONL) or stops the reading with its line number (CSV), instead of the whole file
 * being held in memory (a 600 MB line ended the import with an uncaught RangeError and lost the lines before it).
 */
export const MAX_RECORD_BYTES = 1 << 20;

export async function* jsonlRecords(input: Readable): AsyncIterable<SourceRecord> {
  let line = 0;
  for await (const raw of boundedLines(input, MAX_RECORD_BYTES)) {
    line += 1;
    if (raw === undefined) {
      yield { line, issues: [{ path: '', reason: `longer than ${MAX_RECORD_BYTES} bytes; the line was not read (one result per line)` }] };
      continue;
    }
    // A byte-order mark (as some Windows tools write UTF-8) belongs to no record: without this, the first one is lost.
    const text = line === 1 && raw.startsWith('\uFEFF') ? raw.slice(1) : raw;
    if (text.trim() === '') continue;
    try {
      yield { line, record: JSON.parse(text) as unknown };
    } catch (e) {
      yield { line, issues: [{ path: '', reason: `not valid JSON: ${(e as Error).message}` }] };
    }
  }
}

/**
 * The lines of `input` (split at LF, a CR before it dropped) as UTF-8 text; undefined for a line longer than `max`
 * bytes, whose bytes are skipped to its end without being kept.
 */
export async function* boundedLines(input: Readable, max: number): AsyncIterable<string | undefined> {
  let parts: Buffer[] = [];
  let length = 0;
  let tooLong = false;
  const take = (): string | undefined => {
    const whole = Buffer.concat(parts, length);
    parts = [];
    length = 0;
    if (tooLong) {
      tooLong = false;
      return undefined;
    }
    const end = whole.length > 0 && whole[whole.length - 1] === 0x0d ? whole.length - 1 : whole.length;
    return whole.toString('utf8', 0, end);
  };
  const add = (piece: Buffer): void => {
    if (tooLong) return;
    if (length + piece.length > max + 1) {
      tooLong = true;
      parts = [];
      length = 0;
      return;
    }
    parts.push(piece);
    length += piece.length;
  };
  for await (const chunk of input as AsyncIterable<Buffer | string>) {
    const buffer = typeof chunk === 'string' ? Buffer.from(chunk) : chunk;
    let start = 0;
    for (let at = buffer.indexOf(0x0a); at >= 0; at = buffer.indexOf(0x0a, start)) {
      add(buffer.subarray(start, at));
      yield take();
      start = at + 1;
    }
    if (start < buffer.length) add(buffer.subarray(start));
  }
  if (length > 0 || tooLong) yield take();
}

const NUMERIC_FIELDS = new Set(['revision', 'unitHours', 'oilHours', 'topUpLitres']);
const BOOLEAN_FIELDS = new Set(['oilChanged', 'componentChanged']);
const TEXT_FIELDS = new Set(['sampleId', 'unit', 'component', 'group', 'sampledAt', 'lab']);
const NUMBER = /^\s*[-+]?(\d+\.?\d*|\.\d+)([eE][-+]?\d+)?\s*$/;
const BOOLEANS: Record<string, boolean> = { true: true, false: false };

export async function* csvRecords(input: Readable): AsyncIterable<SourceRecord> {
  let header: string[] | undefined;
  for await (const item of parsedRows(input)) {
    if ('error' in item) {
      // A quoted ";"-separated header ("Probe";"Fe") fails the parser at its first ";" before it is a header.
      const semicolon = header === undefined && /\bgot ";"/.test(item.error) ? `; ${SEMICOLON_ADVICE}` : '';
      yield { line: item.line, issues: [{ path: '', reason: `CSV syntax error, reading stopped here: ${item.error}${semicolon}` }] };
      return;
    }
    const { record, line } = item;
    if (header === undefined) {
      const twice = record.find((name, i) => record.indexOf(name) !== i);
      if (twice !== undefined) {
        yield { line, issues: [{ path: '', reason: `column "${twice}" appears twice in the header; nothing was read` }] };
        return;
      }
      // "Fe" and "readings.Fe" are one field: the later column would silently overwrite the earlier one.
      const targets = record.map(csvTarget);
      const again = targets.findIndex((t, i) => targets.indexOf(t) !== i);
      if (again >= 0) {
        const first = record[targets.indexOf(targets[again]!)]!;
        yield { line, issues: [{ path: '', reason: `columns "${first}" and "${record[again]}" are both ${targets[again]}; nothing was read` }] };
        return;
      }
      const unknown = headerWithoutFields(record);
      if (unknown !== undefined) {
        yield { line, issues: [{ path: '', reason: `${unknown}; nothing was read` }] };
        return;
      }
      header = record;
      continue;
    }
    if (record.length !== header.length) {
      // The line's sampleId, when its column is there, so that the sender can find the line.
      const at = header.indexOf('sampleId');
      const sampleId = at >= 0 && at < record.length && record[at] !== '' ? record[at] : undefined;
      yield { line, issues: [{ path: '', reason: `has ${record.length} cells, the header has ${header.length}` }], ...(sampleId !== undefined && { sampleId }) };
      continue;
    }
    yield { line, record: csvEvent(header, record) };
  }
}

/**
 * Why a header names no event field, or undefined when it names one. A lab's own export read as a plain CSV gives
 * every line a reason of its own (no sampleId, a reading named "Datum;Probe;Fe"); this says once what the file looks
 * like and how it can be read instead: a `;`-separated file (the usual export where numbers have decimal commas) by a
 * mapping with `delimiter` and `decimal`, any other by a mapping naming its columns.
 */
const SEMICOLON_ADVICE =
  'the file looks ";"-separated, as lab exports with decimal commas are; a plain import reads ","-separated CSV with the event field names ' +
  `(sampleId, unit, component, sampledAt, ...) as columns. Read the lab's export through a mapping: wearshift import --map <mapping.yaml> with delimiter: ";" ` +
  `(and decimal: "," when numbers are written 12,5) and its columns named (${LAB_FILES_SECTION})`;

function headerWithoutFields(header: readonly string[]): string | undefined {
  if (header.some((name) => TEXT_FIELDS.has(name) || NUMERIC_FIELDS.has(name) || BOOLEAN_FIELDS.has(name))) return undefined;
  if (header.length === 1 && header[0]!.includes(';')) return `the header holds ";" and no ",": ${SEMICOLON_ADVICE}`;
  return (
    `no column is an event field (sampleId, unit, component, sampledAt, ...; readings are the other columns): a lab's own export is read ` +
    `through a mapping that names its columns: wearshift import --map <mapping.yaml>, with delimiter and decimal for a file separated by another character than "," (${LAB_FILES_SECTION})`
  );
}

export type ParsedRow = { record: string[]; line: number } | { error: string; line: number };

/**
 * The parser's rows, then its error if any. A stream's own async iterator drops rows still buffered when the
 * stream fails, and every row before a syntax error must still be imported or reported. When the input itself fails
 * (the file cannot be read on), the rows parsed before are given, then the input's error is thrown.
 */
export async function* parsedRows(input: Readable, options: { delimiter?: string; skip_empty_lines?: boolean } = {}): AsyncIterable<ParsedRow> {
  if (input.errored) throw input.errored;
  const parser = input.pipe(parse({ bom: true, relax_column_count: true, skip_empty_lines: true, trim: true, max_record_size: MAX_RECORD_BYTES, ...options, info: true }));
  const queue: ParsedRow[] = [];
  let finished = false;
  let readFailure: Error | undefined;
  let wake: (() => void) | undefined;
  const notify = () => {
    wake?.();
    wake = undefined;
  };
  parser.on('data', (d: { record: string[]; info: { lines: number } }) => {
    queue.push({ record: d.record, line: d.info.lines });
    if (queue.length > 1000) parser.pause();
    notify();
  });
  parser.on('error', (e: Error & { lines?: number }) => {
    queue.push({ error: e.message, line: e.lines ?? parser.info.lines });
    finished = true;
    notify();
  });
  parser.on('end', () => {
    finished = true;
    notify();
  });
  // pipe() does not pass the input's error on: without this the parser would wait for an end that never comes.
  input.once('error', (e: Error) => {
    readFailure = e;
    finished = true;
    parser.destroy();
    notify();
  });
  for (;;) {
    const next = queue.shift();
    if (next !== undefined) {
      if (queue.length < 100 && parser.isPaused()) parser.resume();
      yield next;
      if ('error' in next) return;
      continue;
    }
    if (readFailure !== undefined) throw readFailure;
    if (finished) return;
    await new Promise<void>((resolve) => (wake = resolve));
  }
}

/** The event field a CSV column fills: a named field, else a reading ("Fe" and "readings.Fe" both readings.Fe). */
function csvTarget(name: string): string {
  if (TEXT_FIELDS.has(name) || NUMERIC_FIELDS.has(name) || BOOLEAN_FIELDS.has(name)) return name;
  return name.startsWith('readings.') ? name : `readings.${name}`;
}

function csvEvent(header: readonly string[], cells: readonly string[]): Record<string, unknown> {
  const event: Record<string, unknown> = {};
  const readings: Record<string, unknown> = {};
  header.forEach((name, i) => {
    const cell = cells[i]!;
    if (cell === '') return;
    if (TEXT_FIELDS.has(name)) event[name] = cell;
    else if (NUMERIC_FIELDS.has(name)) event[name] = NUMBER.test(cell) ? Number(cell) : cell;
    else if (BOOLEAN_FIELDS.has(name)) event[name] = BOOLEANS[cell.toLowerCase()] ?? cell;
    else readings[name.startsWith('readings.') ? name.slice('readings.'.length) : name] = NUMBER.test(cell) ? Number(cell) : cell;
  });
  event.readings = readings;
  return event;
}
