/**
 * Lab files read through a mapping: the two invented lab exports in demo/labs map to valid result events, and
 * bad cells are reported with their row, column and reason. Expected values are worked out here from the file
 * cells and from definitions outside the project, never copied from the reader's output.
 */
import { readFileSync, mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { Readable } from 'node:stream';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { parse } from 'csv-parse/sync';
import ExcelJS from 'exceljs';
import JSZip from 'jszip';
import { afterAll, describe, expect, it } from 'vitest';
import { InputError } from '../../src/domain/errors.ts';
import { buildGearboxWorkbook } from '../../demo/labs/buildGearboxWorkbook.ts';
import type { LabRecord } from '../../src/intake/labFiles/labRecordReader.ts';
import { loadLabMapping, parseLabMapping } from '../../src/intake/labFiles/loadMapping.ts';
import { readLabFile } from '../../src/intake/labFiles/readLabFile.ts';
import { xlsxRows } from '../../src/intake/labFiles/rowSources.ts';
import { conversionFor } from '../../src/intake/labFiles/units.ts';
import { validateResult } from '../../src/intake/validate.ts';

const NOW = Date.parse('2026-12-01T00:00:00Z');
const validate = (e: unknown) => validateResult(e, { now: NOW });
const dir = mkdtempSync(join(tmpdir(), 'wearshift-labfiles-'));
afterAll(() => rmSync(dir, { recursive: true, force: true }));

async function readAll(file: string, mapFile: string): Promise<LabRecord[]> {
  const out: LabRecord[] = [];
  for await (const r of readLabFile(file, loadLabMapping(mapFile), { validate }).records) out.push(r);
  return out;
}

const accepted = (records: LabRecord[]) => records.filter((r): r is Extract<LabRecord, { status: 'accepted' }> => r.status === 'accepted');

describe('unit conversion', () => {
  it('converts only what holds by definition', () => {
    // 1 ppm = 1 mg/kg (parts per million by mass) and 1 % = 10 000 ppm: SI brochure usage, common practice in oil labs.
    expect(conversionFor('Fe', 'mg/kg')).toEqual({ ok: true, factor: 1 });
    expect(conversionFor('water', '%')).toEqual({ ok: true, factor: 10_000 });
    expect(conversionFor('soot', 'ppm')).toEqual({ ok: true, factor: 1 / 10_000 });
    // 1 cSt = 1 mm²/s: the centistokes is defined as 10⁻⁶ m²/s (CGS unit definition).
    expect(conversionFor('v40', 'cSt')).toEqual({ ok: true, factor: 1 });
    expect(conversionFor('v40', 'mm²/s')).toEqual({ ok: true, factor: 1 });
    // A wear metal in % and a viscosity in Saybolt seconds are not converted.
    expect(conversionFor('Fe', '%')).toMatchObject({ ok: false, reason: 'unit "%" does not convert to ppm for Fe' });
    expect(conversionFor('v40', 'SUS')).toMatchObject({ ok: false, reason: expect.stringContaining('unit "SUS" is not known') });
  });
});

describe('demo engine lab: wide CSV, semicolons, decimal commas, local dates, charge numbers', () => {
  const csvFile = 'demo/labs/engine-lab.csv';
  const rows = parse(readFileSync(csvFile, 'utf8'), { delimiter: ';', columns: true }) as Record<string, string>[];

  it('maps every row to a valid event with converted units and UTC times', async () => {
    const records = await readAll(csvFile, 'demo/labs/engine-lab.map.yaml');
    expect(records.filter((r) => r.status === 'rejected')).toEqual([]);
    const events = accepted(records);
    expect(events).toHaveLength(rows.length);
    const num = (s: string) => Number(s.replace(',', '.'));
    events.forEach((r, i) => {
      const row = rows[i]!;
      expect(r.row).toBe(i + 2);
      expect(r.event.sampleId).toBe(row['Sample no.']);
      expect(r.event.unit).toBe(row.Engine);
      expect(r.event.component).toBe('engine');
      expect(r.event.oilHours).toBe(Number(row['Hours on oil']));
      expect(r.event.unitHours).toBe(Number(row['Engine hours']));
      const readings = r.event.readings as Record<string, number>;
      expect(readings.Fe).toBe(num(row['Fe (ppm)']!));
      expect(readings.tbn).toBe(num(row.TBN!));
      expect(readings.v100).toBe(num(row['Visc. 100°C (cSt)']!));
      // Water in % by mass times 10 000 gives ppm (definition of ppm).
      expect(readings.water).toBeCloseTo(num(row['Water %']!) * 10_000, 6);
    });
  });

  it('converts the lab clock (Europe/Berlin) to UTC: CET is UTC+1 in winter, CEST UTC+2 in summer (EU summer-time rule, from memory)', async () => {
    const events = accepted(await readAll(csvFile, 'demo/labs/engine-lab.map.yaml'));
    const local = (s: string, offset: string) => {
      const [d, t] = s.split(' ');
      const [dd, mm, yyyy] = d!.split('.');
      return new Date(`${yyyy}-${mm}-${dd}T${t}:00${offset}`).toISOString();
    };
    expect(events[0]!.event.sampledAt).toBe(local(rows[0]!.Sampled!, '+01:00'));
    expect(events[6]!.event.sampledAt).toBe(local(rows[6]!.Sampled!, '+02:00'));
  });

  it('sets oilChanged exactly where the charge number changes from the previous sample of the same engine', async () => {
    const events = accepted(await readAll(csvFile, 'demo/labs/engine-lab.map.yaml'));
    const last = new Map<string, string>();
    const expected = rows.map((row) => {
      const before = last.get(row.Engine!);
      last.set(row.Engine!, row['Charge no.']!);
      return before !== undefined && before !== row['Charge no.'];
    });
    expect(events.map((e) => e.event.oilChanged)).toEqual(expected);
    expect(expected.filter(Boolean).length).toBeGreaterThan(2);
  });

  it('reports bad cells with row, column and reason, and keeps the good rows', async () => {
    const lines = readFileSync(csvFile, 'utf8').trimEnd().split('\n');
    const header = lines[0]!.split(';');
    const set = (line: number, column: string, value: string) => {
      const cells = lines[line - 1]!.split(';');
      cells[header.indexOf(column)] = value;
      lines[line - 1] = cells.join(';');
    };
    set(3, 'Sampled', '31.02.2026 09:15'); // no 31 February
    set(6, 'Charge no.', '9'); // GEN-1 was on charge 13 before
    set(8, 'Fe (ppm)', '12,x');
    const file = join(dir, 'engine-bad.csv');
    writeFileSync(file, `${lines.join('\n')}\n`);
    const records = await readAll(file, 'demo/labs/engine-lab.map.yaml');
    const rejected = records.filter((r) => r.status === 'rejected');
    expect(rejected.map((r) => r.issues)).toEqual([
      [{ row: 3, column: 'Sampled', field: 'sampledAt', reason: '"31.02.2026 09:15" is not a date in the format "DD.MM.YYYY HH:mm" or "DD.MM.YYYY"' }],
      [{ row: 6, column: 'Charge no.', field: 'oilChanged', reason: `the charge number went backwards from ${rows[3]!['Charge no.']} to 9 for GEN-1/engine; rows must be in sampling order` }],
      [{ row: 8, column: 'Fe (ppm)', field: 'readings.Fe', reason: 'expected a number (decimal mark ",") or a censored value such as "<1", got "12,x"' }],
    ]);
    expect(accepted(records)).toHaveLength(rows.length - 3);
  });

  it('stops before reading anything when a column is neither mapped nor ignored, or a mapped column is missing', async () => {
    const text = readFileSync(csvFile, 'utf8');
    const extra = join(dir, 'engine-extra.csv');
    writeFileSync(extra, text.replace('Remarks', 'Zinc'));
    await expect(readAll(extra, 'demo/labs/engine-lab.map.yaml')).rejects.toThrow(new InputError('row 1: column "Zinc" is not mapped; add it to a measurand\'s names or to ignore in the mapping'));
    const missing = join(dir, 'engine-missing.csv');
    writeFileSync(missing, text.replace('Charge no.', 'Fill'));
    await expect(readAll(missing, 'demo/labs/engine-lab.map.yaml')).rejects.toThrow(/mapping charge.column: column "Charge no\." is not in the header \(row 1\)/);
  });
});

describe('demo gearbox lab: long layout in an Excel workbook', () => {
  it('the shipped workbook is the one the build script writes', async () => {
    const file = join(dir, 'rebuilt.xlsx');
    await buildGearboxWorkbook(file);
    const a = await readAll(file, 'demo/labs/gearbox-lab.map.yaml');
    const b = await readAll('demo/labs/gearbox-lab.xlsx', 'demo/labs/gearbox-lab.map.yaml');
    expect(b).toEqual(a);
  });

  it('groups the rows of each sample into one event, keeps censored values and converts water % to ppm', async () => {
    const workbook = new ExcelJS.Workbook();
    await workbook.xlsx.readFile('demo/labs/gearbox-lab.xlsx');
    const sheet = workbook.getWorksheet('Results')!;
    const bySample = new Map<string, Record<string, unknown>>();
    sheet.eachRow((row, n) => {
      if (n <= 3) return;
      const v = row.values as unknown[];
      const id = String(v[1]);
      bySample.set(id, { ...(bySample.get(id) ?? {}), [String(v[5])]: v[6] });
    });
    const events = accepted(await readAll('demo/labs/gearbox-lab.xlsx', 'demo/labs/gearbox-lab.map.yaml'));
    expect(events.map((e) => e.event.sampleId)).toEqual([...bySample.keys()]);
    for (const e of events) {
      const cells = bySample.get(e.event.sampleId as string)!;
      const readings = e.event.readings as Record<string, unknown>;
      expect(readings.Fe).toBe(cells.Iron);
      expect(readings.Si).toBe(cells.Silicon);
      expect(readings.iso4406).toBe(cells['ISO code']);
      expect(readings.water).toBeCloseTo((cells['Water (KF)'] as number) * 10_000, 6);
    }
    expect(events.some((e) => (e.event.readings as Record<string, unknown>).Si === '<1')).toBe(true);
    expect(events[0]!.sample.readings.Si).toEqual({ kind: 'censored', bound: 'below', limit: 1 });
    expect(events[0]!.event.sampledAt).toBe('2026-01-10T09:30:00.000Z');
    expect(events[0]!.event.oilChanged).toBe(true);
  });

  it('reads a workbook as a stream: with the shared strings ahead of the sheet in the zip, the first rows come out long before the end of the file', async () => {
    const written = join(dir, 'long-written.xlsx');
    const writer = new ExcelJS.stream.xlsx.WorkbookWriter({ filename: written, useSharedStrings: true });
    const sheet = writer.addWorksheet('Results');
    sheet.addRow(['Lab ref', 'Asset', 'Test', 'Result']).commit();
    for (let i = 0; i < 40_000; i += 1) sheet.addRow([`GB-${i % 50}`, `PS${i % 97}`, 'Iron', ((i * 7919) % 1000) / 10]).commit();
    sheet.commit();
    await writer.commit();
    // The writer puts the sheet first, so the reader has to spool it to a temporary file before it knows the shared
    // strings; the same entries with the workbook and shared strings first can be read row by row as they arrive.
    const original = await JSZip.loadAsync(readFileSync(written));
    const names = Object.keys(original.files).filter((n) => !original.files[n]!.dir);
    const order = ['[Content_Types].xml', '_rels/.rels', 'xl/workbook.xml', 'xl/_rels/workbook.xml.rels', 'xl/sharedStrings.xml', 'xl/styles.xml'];
    const reordered = new JSZip();
    for (const name of [...order.filter((n) => names.includes(n)), ...names.filter((n) => !order.includes(n))]) reordered.file(name, await original.files[name]!.async('nodebuffer'));
    const bytes = await reordered.generateAsync({ type: 'nodebuffer', compression: 'DEFLATE' });
    // The file is handed over 4 KB at a time, only when the reader asks for more.
    let offered = 0;
    const input = new Readable({
      highWaterMark: 4096,
      read() {
        const chunk = bytes.subarray(offered, offered + 4096);
        offered += chunk.length;
        this.push(chunk.length > 0 ? chunk : null);
      },
    });
    let offeredAtRow2: number | undefined;
    let rows = 0;
    for await (const r of xlsxRows(input, 'Results')) {
      expect(r).not.toHaveProperty('error');
      rows += 1;
      if (rows === 2) offeredAtRow2 = offered;
    }
    expect(rows).toBe(40_001);
    expect(offeredAtRow2).toBeLessThan(bytes.length / 4);
  });

  it('reports a unit that does not convert, an unparseable date and a charge number going backwards in a workbook', async () => {
    const mapping = parseLabMapping(`${readFileSync('demo/labs/gearbox-lab.map.yaml', 'utf8').replace('  oilChanged: { column: Oil changed }\n', '')}\ncharge: { column: Fill }\nignore: [Oil changed]\n`);
    const file = join(dir, 'gearbox-bad.xlsx');
    const wb = new ExcelJS.Workbook();
    const sheet = wb.addWorksheet('Results');
    sheet.addRow(['title']);
    sheet.addRow([]);
    sheet.addRow(['Lab ref', 'Asset', 'Compartment', 'Drawn', 'Test', 'Result', 'Units', 'Hrs on oil', 'Op hrs', 'Oil changed', 'Fill']);
    const at = (m: number) => new Date(Date.UTC(2026, m, 3, 8, 0));
    sheet.addRow(['S1', 'PS9', 'gearbox', at(0), 'Iron', 10, 'mg/kg', 100, 1000, 'no', 4]); // row 4
    sheet.addRow(['S2', 'PS9', 'gearbox', at(1), 'Iron', 11, 'mg/kg', 200, 1100, 'no', 5]); // row 5: new charge
    sheet.addRow(['S2', 'PS9', 'gearbox', at(1), 'Copper', 3, 'ppm', 200, 1100, 'no', 5]); // row 6
    sheet.addRow(['S3', 'PS9', 'gearbox', at(2), 'Viscosity @ 40 °C', 900, 'SUS', 300, 1200, 'no', 5]); // row 7
    sheet.addRow(['S4', 'PS9', 'gearbox', '13/40/2026', 'Iron', 12, 'mg/kg', 400, 1300, 'no', 5]); // row 8
    sheet.addRow(['S5', 'PS9', 'gearbox', at(4), 'Copper', 2, '%', 500, 1400, 'no', 5]); // row 9
    sheet.addRow(['S6', 'PS9', 'gearbox', at(5), 'Iron', 14, 'mg/kg', 600, 1500, 'no', 3]); // row 10
    sheet.addRow(['S7', 'PS9', 'gearbox', at(6), 'Iron', 15, 'mg/kg', 700, 1600, 'no', 5]); // row 11
    sheet.addRow(['S7', 'PS9', 'gearbox', at(6), 'Iron', 15, 'mg/kg', 700, 1600, 'no', 5]); // row 12: Iron twice
    sheet.addRow(['S8', 'PS9', 'gearbox', at(7), 'Iron', 16, 'mg/kg', 100, 1700, 'no', 6]); // row 13: new charge
    await wb.xlsx.writeFile(file);
    const records: LabRecord[] = [];
    for await (const r of readLabFile(file, mapping, { validate }).records) records.push(r);
    const issues = records.filter((r) => r.status === 'rejected').flatMap((r) => r.issues);
    expect(issues).toEqual([
      { row: 7, column: 'Units', field: 'readings.v40', reason: 'unit "SUS" is not known; v40 is kept in mm²/s' },
      { row: 8, column: 'Drawn', field: 'sampledAt', reason: '"13/40/2026" is not a date in the format "MM/DD/YYYY HH:mm" or "MM/DD/YYYY"' },
      { row: 9, column: 'Units', field: 'readings.Cu', reason: 'unit "%" does not convert to ppm for Cu' },
      { row: 10, column: 'Fill', field: 'oilChanged', reason: 'the charge number went backwards from 5 to 3 for PS9/gearbox; rows must be in sampling order' },
      { row: 12, column: 'Test', field: 'readings.Fe', reason: 'Fe appears twice in this sample (first in row 11)' },
    ]);
    // The charge is compared with the last accepted sample: the rejected S6 (charge 3) does not count.
    const ok = accepted(records);
    expect(ok.map((r) => [r.event.sampleId, r.event.oilChanged])).toEqual([
      ['S1', false],
      ['S2', true],
      ['S8', true],
    ]);
  });
});

describe('mapping file', () => {
  it('names the path and reason of every mistake', () => {
    expect(() => parseLabMapping('sampledAt: { column: D }\nmeasurands: [{ measurand: Iron, names: [Fe] }]\ndecimal: ";"', 'lab.yaml')).toThrow(
      /lab\.yaml: invalid lab mapping\n {2}decimal: (.|\n)*measurands\.0\.measurand: unknown measurand "Iron"/,
    );
    expect(() => parseLabMapping('layout: long\nsampledAt: { column: D }\nfields: { unit: { column: U } }', 'lab.yaml')).toThrow(
      /fields\.sampleId: sampleId is required(.|\n)*fields\.component: component is required(.|\n)*long: the long layout needs long\.measurandColumn/,
    );
    expect(() => parseLabMapping('sampledAt: { column: D }\nfields: { sampleId: { column: S }, unit: { column: U }, component: { value: c } }\nmeasurands: [{ measurand: Fe, names: [Iron] }, { measurand: Cu, names: [iron] }]')).toThrow(
      /"iron" is given for both Fe and Cu/,
    );
  });
});

describe('mapping reference', () => {
  it('README lab mapping reference equals the one generated from the zod schema (run `npm run docs` after a change)', async () => {
    const { withMappingReference } = await import('../../src/intake/labFiles/mappingReference.ts');
    const readme = readFileSync('README.md', 'utf8');
    expect(withMappingReference(readme)).toBe(readme);
    expect(readme).toContain('| `charge.column` | string |');
  });
});
