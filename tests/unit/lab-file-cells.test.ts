/**
 * What a lab file's cells may mean, and what they may not: numbers with a thousands separator only between whole
 * groups of three digits, dates only when the day exists, one column per measurand, a sample and its revision in one
 * long-layout file, and a line too long to be a result. Each wrong reading here was once taken silently (a value ten
 * or a thousand times off, 30 February moved to 2 March, a reading overwritten by a later column).
 */
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { Readable } from 'node:stream';
import { afterAll, describe, expect, it } from 'vitest';
import { InputError } from '../../src/domain/errors.ts';
import { csvRecords, jsonlRecords, MAX_RECORD_BYTES, type SourceRecord } from '../../src/intake/fileRecords.ts';
import { readDate } from '../../src/intake/labFiles/dates.ts';
import type { LabRecord } from '../../src/intake/labFiles/labRecordReader.ts';
import { parseLabMapping } from '../../src/intake/labFiles/loadMapping.ts';
import { parseNumber } from '../../src/intake/labFiles/numbers.ts';
import { readLabFile } from '../../src/intake/labFiles/readLabFile.ts';
import { cellOf } from '../../src/intake/labFiles/rowSources.ts';
import { validateResult } from '../../src/intake/validate.ts';

const NOW = Date.parse('2026-12-01T00:00:00Z');
const dir = mkdtempSync(join(tmpdir(), 'wearshift-labcells-'));
afterAll(() => rmSync(dir, { recursive: true, force: true }));

async function read(name: string, csv: string, mappingYaml: string): Promise<LabRecord[]> {
  const file = join(dir, name);
  writeFileSync(file, csv);
  const out: LabRecord[] = [];
  for await (const r of readLabFile(file, parseLabMapping(mappingYaml, `${name}.map.yaml`), { validate: (e) => validateResult(e, { now: NOW }) }).records) out.push(r);
  return out;
}

async function all(records: AsyncIterable<SourceRecord>): Promise<SourceRecord[]> {
  const out: SourceRecord[] = [];
  for await (const r of records) out.push(r);
  return out;
}

describe('numbers written with a thousands separator', () => {
  it('takes the separator only between whole groups of three digits before the decimal mark', () => {
    const pointComma = { decimal: '.', thousands: ',' } as const;
    const commaPoint = { decimal: ',', thousands: '.' } as const;
    // The usual ways of writing 1234.5 (common practice: English and continental European digit grouping).
    expect(parseNumber('1,234.5', pointComma)).toBe(1234.5);
    expect(parseNumber('1.234,5', commaPoint)).toBe(1234.5);
    expect(parseNumber('12 345', { decimal: '.', thousands: ' ' })).toBe(12345);
    expect(parseNumber("1'234", { decimal: '.', thousands: "'" })).toBe(1234);
    expect(parseNumber('7,8', commaPoint)).toBe(7.8);
    // Not grouped by three: no number at all, where the separator used to be dropped (15, 12345, 5, 15).
    expect(parseNumber('1,5', pointComma)).toBeUndefined();
    expect(parseNumber('12,34,5', pointComma)).toBeUndefined();
    expect(parseNumber(',5', pointComma)).toBeUndefined();
    expect(parseNumber('1.5', commaPoint)).toBeUndefined();
    // Spaces inside a number count only where the space is the separator; a point in a decimal-comma file is neither mark.
    expect(parseNumber('1 5', { decimal: '.', thousands: '' })).toBeUndefined();
    expect(parseNumber('1.2', { decimal: ',', thousands: '' })).toBeUndefined();
    // Written like a number, but none a reading can be.
    expect(parseNumber('1e400', { decimal: '.', thousands: '' })).toBeUndefined();
  });

  it('refuses a mapping whose thousands separator is its decimal mark', () => {
    expect(() => parseLabMapping('sampledAt: { column: D }\nfields: { sampleId: { column: S }, unit: { value: U }, component: { value: C } }\ndecimal: "."\nthousands: "."\n', 'lab.yaml')).toThrow(
      /lab\.yaml: invalid lab mapping\n {2}thousands: "\." is also the decimal mark/,
    );
  });

  it('names the row, column and both marks for a cell that is no number', async () => {
    const records = await read(
      'grouped.csv',
      'Sample;Drawn;Fe\nA1;2026-01-05T08:00:00Z;1,234.5\nA2;2026-01-06T08:00:00Z;1,5\n',
      'delimiter: ";"\ndecimal: "."\nthousands: ","\nsampledAt: { column: Drawn }\nfields: { sampleId: { column: Sample }, unit: { value: U1 }, component: { value: gearbox } }\nmeasurands: [{ measurand: Fe, names: [Fe] }]\n',
    );
    expect(records[0]).toMatchObject({ status: 'accepted', event: { readings: { Fe: 1234.5 } } });
    expect(records[1]).toMatchObject({ status: 'rejected', issues: [{ row: 3, column: 'Fe', field: 'readings.Fe', reason: 'expected a number (decimal mark ".", thousands "," between groups of three digits) or a censored value such as "<1", got "1,5"' }] });
  });
});

describe('ISO 8601 dates in a mapped file', () => {
  it('reads only dates and times that exist, with offsets the world uses (ISO 8601; UTC offsets −12:00 to +14:00, from memory)', () => {
    const iso = (t: string) => readDate(t, ['iso'], 'UTC');
    expect(iso('2026-02-30T08:00:00Z')).toBeUndefined();
    expect(iso('2026-03-01T24:00:00Z')).toBeUndefined();
    // 2026 is no leap year (Gregorian rule: divisible by 4, not by 100 unless by 400); 2024 is one.
    expect(iso('2026-02-29T08:00:00+14:00')).toBeUndefined();
    expect(iso('2024-02-29T23:59:59Z')).toBe(Date.UTC(2024, 1, 29, 23, 59, 59));
    expect(iso('2026-02-28T08:00:00+15:00')).toBeUndefined();
    // An offset is subtracted to get UTC: 08:00 at +14:00 is 18:00 the day before; fractions of a second are kept.
    expect(iso('2026-02-28T08:00:00+14:00')).toBe(Date.UTC(2026, 1, 27, 18, 0, 0));
    expect(iso('2026-02-28T08:00:00.250-03:30')).toBe(Date.UTC(2026, 1, 28, 11, 30, 0, 250));
  });
});

describe('one column per measurand', () => {
  it('a plain CSV with "Fe" and "readings.Fe" is refused at its header', async () => {
    const records = await all(csvRecords(Readable.from(['sampleId,unit,component,sampledAt,Fe,readings.Fe\nX1,U1,gearbox,2026-01-05T08:00:00Z,5,50\n'])));
    expect(records).toEqual([{ line: 1, issues: [{ path: '', reason: 'columns "Fe" and "readings.Fe" are both readings.Fe; nothing was read' }] }]);
  });

  it('a mapped wide file with two columns named for one measurand is refused before anything is read', async () => {
    await expect(
      read('twice.csv', 'Sample,Drawn,Fe (ppm),FE\nA1,2026-01-05T08:00:00Z,5,50\n', 'sampledAt: { column: Drawn }\nfields: { sampleId: { column: Sample }, unit: { value: U1 }, component: { value: gearbox } }\nmeasurands: [{ measurand: Fe, names: [Fe (ppm), FE] }]\n'),
    ).rejects.toThrow(new InputError('row 1: columns "Fe (ppm)" and "FE" are both Fe; ignore one of them in the mapping, nothing was read'));
  });
});

describe('the long layout', () => {
  const mapping =
    'layout: long\nsampledAt: { column: Drawn }\nfields: { sampleId: { column: Sample }, revision: { column: Rev }, unit: { value: U1 }, component: { value: gearbox } }\nlong: { measurandColumn: Test, valueColumn: Result }\nmeasurands: [{ measurand: Fe, names: [Iron] }, { measurand: Cu, names: [Copper] }]\n';

  it('reads a sample and its revision in one file as two results', async () => {
    const records = await read(
      'revised.csv',
      'Sample,Rev,Drawn,Test,Result\nR1,0,2026-01-05T08:00:00Z,Iron,12\nR1,0,2026-01-05T08:00:00Z,Copper,3\nR1,1,2026-01-05T08:00:00Z,Iron,21\nR1,1,2026-01-05T08:00:00Z,Copper,3\n',
      mapping,
    );
    expect(records.map((r) => r.status)).toEqual(['accepted', 'accepted']);
    expect(records.map((r) => (r.status === 'accepted' ? [r.event.revision, (r.event.readings as Record<string, unknown>).Fe] : undefined))).toEqual([
      [0, 12],
      [1, 21],
    ]);
  });

  it('still refuses a measurand twice in one sample, and the rows of one revision apart', async () => {
    const twice = await read('twice-long.csv', 'Sample,Rev,Drawn,Test,Result\nR1,0,2026-01-05T08:00:00Z,Iron,12\nR1,0,2026-01-05T08:00:00Z,Iron,13\n', mapping);
    expect(twice).toMatchObject([{ status: 'rejected', issues: [{ row: 3, field: 'readings.Fe', reason: 'Fe appears twice in this sample (first in row 2)' }] }]);
    const apart = await read('apart.csv', 'Sample,Rev,Drawn,Test,Result\nR1,0,2026-01-05T08:00:00Z,Iron,12\nR2,0,2026-01-06T08:00:00Z,Iron,13\nR1,0,2026-01-05T08:00:00Z,Copper,3\n', mapping);
    expect(apart[2]).toMatchObject({ status: 'rejected', issues: [{ row: 4, reason: 'the rows of sample "R1" are not next to each other; sort the file by sample (and revision)' }] });
  });
});

describe('a line too long to be a result', () => {
  it('JSONL: reported with its line number and skipped, the lines around it read', async () => {
    const good = (id: string) => JSON.stringify({ sampleId: id });
    const huge = `{"sampleId":"${'x'.repeat(MAX_RECORD_BYTES + 10)}"}`;
    // Fed in small pieces, as a file stream gives them, with CRLF line ends.
    const text = `${good('G1')}\r\n${huge}\r\n${good('G2')}\r\n`;
    const pieces = text.match(/[\s\S]{1,65536}/g)!;
    const records = await all(jsonlRecords(Readable.from(pieces.map((p) => Buffer.from(p)))));
    expect(records).toEqual([
      { line: 1, record: { sampleId: 'G1' } },
      { line: 2, issues: [{ path: '', reason: `longer than ${MAX_RECORD_BYTES} bytes; the line was not read (one result per line)` }] },
      { line: 3, record: { sampleId: 'G2' } },
    ]);
  });

  it('JSONL: a character of several bytes split between two pieces is read whole', async () => {
    const bytes = Buffer.from(`{"unit":"Förderband"}\n`);
    const cut = bytes.indexOf(0xc3) + 1;
    const records = await all(jsonlRecords(Readable.from([bytes.subarray(0, cut), bytes.subarray(cut)])));
    expect(records).toEqual([{ line: 1, record: { unit: 'Förderband' } }]);
  });

  it('CSV: the reading stops at the over-long record with its line, after the rows before it', async () => {
    const csv = `sampleId,unit,component,sampledAt,Fe\nX1,U1,gearbox,2026-01-05T08:00:00Z,5\nX2,U1,gearbox,2026-01-06T08:00:00Z,${'9'.repeat(MAX_RECORD_BYTES + 10)}\n`;
    const records = await all(csvRecords(Readable.from([csv])));
    expect(records).toHaveLength(2);
    expect(records[0]).toMatchObject({ line: 2, record: { sampleId: 'X1' } });
    expect(records[1]).toMatchObject({ line: 3, issues: [{ path: '', reason: expect.stringMatching(/^CSV syntax error, reading stopped here: .*max(imum)? .*record/i) }] });
  });
});

describe('a workbook cell with a formula but no saved value', () => {
  it('is reported as a formula, with what to do, not as "[object Object]"', async () => {
    // exceljs gives a formula cell as { formula, result }; a file written without calculated values has no result.
    expect(cellOf({ formula: 'SUM(B2:B4)' })).toBe('=SUM(B2:B4)');
    expect(cellOf({ sharedFormula: 'C2' })).toBe('=C2');
    expect(cellOf({ formula: 'SUM(B2:B4)', result: 7 })).toBe(7);
    const records = await read(
      'formula.csv',
      'Sample,Drawn,Fe\nA1,2026-01-05T08:00:00Z,=SUM(B2:B4)\n',
      'sampledAt: { column: Drawn }\nfields: { sampleId: { column: Sample }, unit: { value: U1 }, component: { value: gearbox } }\nmeasurands: [{ measurand: Fe, names: [Fe] }]\n',
    );
    expect(records[0]).toMatchObject({ status: 'rejected', issues: [{ row: 2, column: 'Fe', reason: expect.stringContaining('got "=SUM(B2:B4)", a formula without a saved value: open and save the workbook') }] });
  });
});
