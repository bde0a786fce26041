/**
 * The rows of a lab file, streamed: CSV through csv-parse, Excel workbooks (.xlsx) through the exceljs
 * streaming reader, which reads the zip entry by entry and hands rows over as it parses them. A worksheet
 * that comes before the workbook part or the shared-string table in the zip (as Excel and exceljs write
 * them) is first spooled to a temporary file by the reader and parsed from there, so a workbook of any
 * length is read in bounded memory either way (its shared-string table aside).
 */
import { PassThrough, type Readable } from 'node:stream';
import ExcelJS from 'exceljs';
import { parsedRows } from '../fileRecords.ts';

/** A cell as read: text from CSV; number, text, boolean or date from a workbook; null when empty. */
export type Cell = string | number | boolean | Date | null;

export type SourceRow = { readonly row: number; readonly cells: readonly Cell[] } | { readonly row: number; readonly error: string };

export type LabFileKind = 'csv' | 'xlsx';

export function labFileKind(path: string, explicit?: string): LabFileKind | undefined {
  const f = (explicit ?? path.split('.').pop() ?? '').toLowerCase();
  if (f === 'csv' || f === 'txt') return 'csv';
  if (f === 'xlsx') return 'xlsx';
  return undefined;
}

export async function* csvRows(input: Readable, delimiter: string): AsyncIterable<SourceRow> {
  for await (const item of parsedRows(input, { delimiter, skip_empty_lines: false })) {
    if ('error' in item) {
      yield { row: item.line, error: `CSV syntax error, reading stopped here: ${item.error}` };
      return;
    }
    yield { row: item.line, cells: item.record.map((c) => (c === '' ? null : c)) };
  }
}

export async function* xlsxRows(input: Readable, sheet: string | number): AsyncIterable<SourceRow> {
  // The workbook reader pipes its input on and never hears of the input's error: it would wait for ever. Ended here
  // instead, it finishes with what it has, and the caller reports the read error (stoppingAtReadError).
  const source = new PassThrough();
  input.once('error', () => source.end());
  input.pipe(source);
  const reader = new ExcelJS.stream.xlsx.WorkbookReader(source, { worksheets: 'emit', sharedStrings: 'cache', styles: 'cache', hyperlinks: 'ignore', entries: 'ignore' });
  let position = 0;
  let found = false;
  try {
    for await (const worksheet of reader) {
      position += 1;
      const name = (worksheet as unknown as { name?: string }).name;
      const wanted = typeof sheet === 'number' ? position === sheet : name === sheet;
      if (!wanted || found) {
        // Sheets not asked for are read past (the zip is one stream).
        for await (const _row of worksheet) void _row;
        continue;
      }
      found = true;
      for await (const row of worksheet) {
        const values = Array.isArray(row.values) ? row.values.slice(1) : [];
        yield { row: row.number, cells: Array.from(values, cellOf) };
      }
    }
  } catch (e) {
    yield { row: 0, error: `not a readable .xlsx workbook: ${(e as Error).message}` };
    return;
  }
  if (!found) yield { row: 0, error: `the workbook has no worksheet ${typeof sheet === 'number' ? `number ${sheet}` : `"${sheet}"`} (it has ${position})` };
}

/** A workbook cell value as exceljs gives it, reduced to what a lab cell can mean. */
export function cellOf(v: unknown): Cell {
  if (v === undefined || v === null || v === '') return null;
  if (typeof v === 'string' || typeof v === 'number' || typeof v === 'boolean' || v instanceof Date) return v;
  if (typeof v === 'object') {
    const o = v as { richText?: { text: string }[]; result?: unknown; text?: unknown; error?: string };
    if (Array.isArray(o.richText)) return o.richText.map((r) => r.text).join('');
    if ('result' in o) return cellOf(o.result);
    // A formula the writing program did not calculate: its text, which the reader reports as a formula.
    const formula = (v as { formula?: unknown; sharedFormula?: unknown }).formula ?? (v as { sharedFormula?: unknown }).sharedFormula;
    if (typeof formula === 'string') return `=${formula}`;
    if (typeof o.text === 'string') return o.text;
    if (typeof o.error === 'string') return o.error;
  }
  return String(v);
}
