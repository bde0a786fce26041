/**
 * What a plain import says about a file it cannot read as one: a lab's spreadsheet or ";"-separated export is sent to
 * the lab mapping (`--map`, the README section that explains it), and an unknown `--format` is named with the formats
 * accepted — instead of advice that cannot work (`--format csv` for a workbook) or one rejection per line.
 */
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { Readable } from 'node:stream';
import { afterAll, describe, expect, it } from 'vitest';
import { InputError } from '../../src/domain/errors.ts';
import { csvRecords, formatOf, LAB_FILES_SECTION, type SourceRecord } from '../../src/intake/fileRecords.ts';
import { readLabFile } from '../../src/intake/labFiles/readLabFile.ts';
import { LabMappingSchema } from '../../src/intake/labFiles/mappingSchema.ts';
import { runCli } from '../helpers/cli.ts';

const dir = mkdtempSync(join(tmpdir(), 'wearshift-format-hints-'));
afterAll(() => rmSync(dir, { recursive: true, force: true }));

async function all(records: AsyncIterable<SourceRecord>): Promise<SourceRecord[]> {
  const out: SourceRecord[] = [];
  for await (const r of records) out.push(r);
  return out;
}

/** The reason of a record the reader refused; fails the test for a record it read. */
function reasonOf(r: SourceRecord | undefined): string {
  if (r === undefined || !('issues' in r)) throw new Error(`expected a refusal, got ${JSON.stringify(r)}`);
  return r.issues[0]!.reason;
}

function thrown(f: () => unknown): Error {
  try {
    f();
  } catch (e) {
    return e as Error;
  }
  throw new Error('expected a refusal');
}

describe('the format of a plain result file', () => {
  it('sends a workbook to the column mapping, not to --format csv', () => {
    for (const [file, explicit] of [['lab/export.xlsx', undefined], ['lab/export.XLSX', undefined], ['lab/export.dat', 'xlsx']] as const) {
      const e = thrown(() => formatOf(file, explicit));
      expect(e).toBeInstanceOf(InputError);
      expect(e.message).toBe(`${file}: a lab's spreadsheet export needs a column mapping that says which column is what: wearshift import --map <mapping.yaml> ${file}; see ${LAB_FILES_SECTION}`);
      expect(e.message).not.toContain('--format csv');
    }
    // An older workbook cannot be read even with a mapping: it says so.
    expect(thrown(() => formatOf('old.xls')).message).toContain('wearshift import --map <mapping.yaml> old.xls (saved as .xlsx or CSV first)');
  });

  it('names an unknown --format as unknown, with the formats accepted', () => {
    const e = thrown(() => formatOf('results.csv', 'foo'));
    expect(e).toBeInstanceOf(InputError);
    expect(e.message).toMatch(/^--format "foo": unknown format; accepted: csv, jsonl \(or ndjson\); /);
    expect(e.message).not.toContain('cannot tell the format from the name');
    // A known one still wins over the file name.
    expect(formatOf('results.txt', 'JSONL')).toBe('jsonl');
  });

  it('with --map: an unknown --format is named as unknown too, with the lab-file formats', () => {
    const mapping = LabMappingSchema.parse({ fields: { sampleId: { column: 'Probe' }, unit: { value: 'U1' }, component: { value: 'engine' } }, sampledAt: { column: 'Datum' } });
    const e = thrown(() => readLabFile(join(dir, 'lab.csv'), mapping, { format: 'foo', validate: () => ({ ok: false, issues: [] }) as never }));
    expect(e).toBeInstanceOf(InputError);
    expect(e.message).toBe('--format "foo": unknown format for a lab file read with --map; accepted: csv (or txt), xlsx');
  });
});

describe('a lab export read as a plain CSV', () => {
  it('says once that a ";"-separated file looks so, and points to a mapping with delimiter and decimal', async () => {
    const records = await all(csvRecords(Readable.from(['Probe;Anlage;Datum;Fe\nEL-1;GEN-1;05.01.2026;12,5\nEL-2;GEN-1;06.01.2026;13,1\n'])));
    expect(records).toHaveLength(1);
    const [header] = records;
    expect(header).toMatchObject({ line: 1 });
    const reason = reasonOf(header);
    expect(reason).toMatch(/^the header holds ";" and no ",": the file looks ";"-separated/);
    expect(reason).toContain('wearshift import --map <mapping.yaml> with delimiter: ";"');
    expect(reason).toContain('decimal: ","');
    expect(reason).toContain(LAB_FILES_SECTION);
    expect(reason).toMatch(/nothing was read$/);
  });

  it('gives the same advice when the ";"-separated header is quoted and the parser stops at it', async () => {
    const [only] = await all(csvRecords(Readable.from(['"Probe";"Anlage";"Fe"\n"EL-1";"GEN-1";"12,5"\n'])));
    const reason = reasonOf(only);
    expect(reason).toMatch(/^CSV syntax error, reading stopped here: .*; the file looks ";"-separated/);
    expect(reason).toContain('delimiter: ";"');
  });

  it('says when no column is an event field, instead of rejecting each line for a missing sampleId', async () => {
    const records = await all(csvRecords(Readable.from(['Probe,Anlage,Fe\nEL-1,GEN-1,12\nEL-2,GEN-1,13\n'])));
    expect(records).toHaveLength(1);
    expect(reasonOf(records[0])).toMatch(/^no column is an event field \(sampleId, unit, component, sampledAt, .*wearshift import --map <mapping.yaml>/);
    // A header with an event field is read as before, row by row.
    const plain = await all(csvRecords(Readable.from(['sampleId,unit,component,sampledAt,Fe\nA,U,c,2026-03-01T08:00:00Z,1\n'])));
    expect(plain).toEqual([{ line: 2, record: { sampleId: 'A', unit: 'U', component: 'c', sampledAt: '2026-03-01T08:00:00Z', readings: { Fe: 1 } } }]);
  });
});

// The real command line (a Node process, through tsx after an edit): generous bounds, no timing.
describe('wearshift import without --map', { timeout: 600_000 }, () => {
  it('exits 2 for a workbook naming --map and the README section; 1 for a ";"-separated CSV, with the hint on the header line', async () => {
    const workbook = join(dir, 'lab-export.xlsx');
    writeFileSync(workbook, 'not read: refused by its name');
    const xlsx = await runCli(['import', '--dry-run', workbook]);
    expect(xlsx.code).toBe(2);
    expect(xlsx.stderr).toContain(`wearshift import --map <mapping.yaml> ${workbook}; see ${LAB_FILES_SECTION}`);
    expect(xlsx.stderr).not.toContain('--format csv');

    const unknown = await runCli(['import', '--dry-run', '--format', 'foo', workbook]);
    expect(unknown.code).toBe(2);
    expect(unknown.stderr).toContain('--format "foo": unknown format; accepted: csv, jsonl (or ndjson)');

    const semicolons = join(dir, 'lab-export.csv');
    writeFileSync(semicolons, 'Probe;Anlage;Datum;Fe\nEL-1;GEN-1;05.01.2026;12,5\n');
    const csv = await runCli(['import', '--dry-run', semicolons]);
    expect(csv.code).toBe(1);
    expect(csv.stderr).toMatch(/line 1: \(record\): the header holds ";" and no ",": the file looks ";"-separated.*delimiter: ";"/);
  });
});
