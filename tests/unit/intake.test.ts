/** Reading result files (CSV, JSONL) into records, and the validation every intake path shares. */
import { Readable } from 'node:stream';
import { describe, expect, it } from 'vitest';
import { csvRecords, FileReadError, formatOf, jsonlRecords, stoppingAtReadError, type SourceRecord } from '../../src/intake/fileRecords.ts';
import { validateBatch, validateResult } from '../../src/intake/validate.ts';

async function all(it: AsyncIterable<SourceRecord>): Promise<SourceRecord[]> {
  const out: SourceRecord[] = [];
  for await (const r of it) out.push(r);
  return out;
}

const NOW = Date.parse('2026-03-02T00:00:00Z');

describe('CSV records', () => {
  it('maps event columns to fields and other columns to readings; an empty cell is no value', async () => {
    const csv = [
      'sampleId,revision,unit,component,sampledAt,oilHours,oilChanged,topUpLitres,Fe,Si,iso4406,readings.v100',
      'LAB-1,0,PS2-P3,gearbox,2026-03-01T08:00:00Z,250,false,2.5,12,<1,18/16/13,13.9',
      'LAB-2,,PS2-P3,gearbox,2026-03-01T09:00:00Z,,TRUE,,7,,,',
    ].join('\n');
    const [a, b] = await all(csvRecords(Readable.from([csv])));
    expect(a).toEqual({
      line: 2,
      record: { sampleId: 'LAB-1', revision: 0, unit: 'PS2-P3', component: 'gearbox', sampledAt: '2026-03-01T08:00:00Z', oilHours: 250, oilChanged: false, topUpLitres: 2.5, readings: { Fe: 12, Si: '<1', iso4406: '18/16/13', v100: 13.9 } },
    });
    expect(b).toEqual({ line: 3, record: { sampleId: 'LAB-2', unit: 'PS2-P3', component: 'gearbox', sampledAt: '2026-03-01T09:00:00Z', oilChanged: true, readings: { Fe: 7 } } });
    // The censored reading stays censored through validation: a bound, not a number.
    const parsed = validateResult((a as { record: unknown }).record, { now: NOW });
    expect(parsed.ok && parsed.sample.readings.Si).toEqual({ kind: 'censored', bound: 'below', limit: 1 });
  });

  it('reports a row with the wrong number of cells by its line and goes on', async () => {
    const csv = 'sampleId,unit,component,sampledAt,Fe\nA,U,c,2026-03-01T08:00:00Z,1\nB,U,c\nC,U,c,2026-03-01T08:00:00Z,3\n';
    const records = await all(csvRecords(Readable.from([csv])));
    expect(records.map((r) => r.line)).toEqual([2, 3, 4]);
    // The sampleId travels with the report, so that the sender can find the line.
    expect(records[1]).toEqual({ line: 3, sampleId: 'B', issues: [{ path: '', reason: 'has 3 cells, the header has 5' }] });
  });

  it('takes oilChanged only as true or false: "no", "0", "yes" and "1" reach validation as text and are refused', async () => {
    const csv = ['sampleId,unit,component,sampledAt,oilChanged,Fe', ...['no', '0', 'yes', '1'].map((v, i) => `L-${i},U,c,2026-03-01T08:00:00Z,${v},1`)].join('\n');
    for (const r of await all(csvRecords(Readable.from([csv])))) {
      const parsed = validateResult((r as { record: unknown }).record, { now: NOW });
      expect(parsed.ok).toBe(false);
      expect(!parsed.ok && parsed.issues).toEqual([{ path: 'oilChanged', reason: 'oilChanged must be true or false' }]);
    }
  });

  it('reports every problem of a line at once, and names a missing field in words', () => {
    const parsed = validateResult({ sampleId: 'L-9', component: 'gearbox', sampledAt: '2026-03-01T08:00:00Z', unitHours: -5, readings: { Fe: 'abc', Zz: 1 } }, { now: NOW });
    expect(parsed.ok).toBe(false);
    const paths = !parsed.ok ? parsed.issues.map((i) => i.path).sort() : [];
    expect(paths).toEqual(['readings.Fe', 'readings.Zz', 'unit', 'unitHours']);
    expect(!parsed.ok && parsed.issues.find((i) => i.path === 'unit')?.reason).toBe('unit is required (missing or empty)');
    // An empty or blank unit: one plain reason, not the character rule beside it.
    for (const unit of ['', '   ']) {
      const blank = validateResult({ sampleId: 'L-9', unit, component: 'gearbox', sampledAt: '2026-03-01T08:00:00Z', readings: { Fe: 1 } }, { now: NOW });
      expect(!blank.ok && blank.issues).toEqual([{ path: 'unit', reason: 'unit must not be empty' }]);
    }
  });

  it('counts lines of quoted cells that span lines, and stops with a clear reason at broken quoting', async () => {
    const csv = 'sampleId,unit,component,sampledAt,lab,Fe\nA,U,c,2026-03-01T08:00:00Z,"North\nlab",1\nB,U,c,2026-03-01T08:00:00Z,"unclosed,2\n';
    const records = await all(csvRecords(Readable.from([csv])));
    expect(records[0]).toMatchObject({ line: 3, record: { lab: 'North\nlab' } });
    expect(records[1]).toMatchObject({ issues: [{ reason: expect.stringMatching(/^CSV syntax error, reading stopped here/) }] });
  });

  it('refuses a header that names a column twice', async () => {
    const records = await all(csvRecords(Readable.from(['sampleId,Fe,Fe\nA,1,2\n'])));
    expect(records).toEqual([{ line: 1, issues: [{ path: '', reason: 'column "Fe" appears twice in the header; nothing was read' }] }]);
  });
});

describe('JSONL records', () => {
  it('skips blank lines and reports a line that is not JSON', async () => {
    const records = await all(jsonlRecords(Readable.from(['{"sampleId":"A"}\n\n{oops\n{"sampleId":"B"}\n'])));
    expect(records.map((r) => [r.line, 'record' in r ? (r.record as { sampleId: string }).sampleId : 'error'])).toEqual([
      [1, 'A'],
      [3, 'error'],
      [4, 'B'],
    ]);
  });

  it('reads the first record of a file that starts with a UTF-8 byte-order mark', async () => {
    const records = await all(jsonlRecords(Readable.from([Buffer.from('\uFEFF{"sampleId":"A"}\n{"sampleId":"B"}\n', 'utf8')])));
    expect(records).toEqual([
      { line: 1, record: { sampleId: 'A' } },
      { line: 2, record: { sampleId: 'B' } },
    ]);
    // Only before the first record: elsewhere it is part of the line, and the line is reported.
    const inside = await all(jsonlRecords(Readable.from(['{"sampleId":"A"}\n\uFEFF{"sampleId":"B"}\n'])));
    expect(inside[1]).toMatchObject({ line: 2, issues: [{ reason: expect.stringMatching(/^not valid JSON/) }] });
  });

  it('tells the format by the file name', () => {
    expect(formatOf('a/b.CSV')).toBe('csv');
    expect(formatOf('x.ndjson')).toBe('jsonl');
    expect(() => formatOf('x.txt')).toThrow(/--format/);
  });
});

describe('a file that cannot be read to its end', () => {
  /** A stream that gives `text`, then fails as a disk or a directory does. */
  function failingAfter(text: string): Readable {
    const stream = new Readable({ read() {} });
    stream.push(text);
    setImmediate(() => stream.destroy(Object.assign(new Error('EIO: i/o error, read'), { code: 'EIO' })));
    return stream;
  }

  for (const [format, read, text] of [
    ['CSV', csvRecords, 'sampleId,unit,component,sampledAt,Fe\nA,U,c,2026-03-01T08:00:00Z,1\nB,U,c,2026-03-01T09:00:00Z,2\nC,U,c,2026-03-01T1'],
    ['JSONL', jsonlRecords, '{"sampleId":"A"}\n{"sampleId":"B"}\n{"sampleId":"C","read'],
  ] as const) {
    it(`${format}: gives the whole records read before, not the cut one, then an InputError naming the file and the reason`, async () => {
      const stream = failingAfter(text);
      const got: SourceRecord[] = [];
      const reading = (async () => {
        for await (const r of stoppingAtReadError('lab.file', stream, read(stream))) got.push(r);
      })();
      await expect(reading).rejects.toThrow(FileReadError);
      await expect(reading).rejects.toThrow('lab.file: cannot read the file: EIO: i/o error, read');
      expect(got.map((r) => ('record' in r ? (r.record as { sampleId: string }).sampleId : 'issue'))).toEqual(['A', 'B']);
    });
  }

  it('passes other errors of the reader on as they are', async () => {
    const stream = Readable.from(['x']);
    // eslint-disable-next-line require-yield
    const broken = (async function* () {
      throw new TypeError('a bug, not the file');
    })();
    await expect(all(stoppingAtReadError('lab.file', stream, broken))).rejects.toThrow(TypeError);
  });
});

describe('validation', () => {
  const event = { sampleId: 'L-1', unit: 'U', component: 'engine', sampledAt: '2026-03-01T08:00:00Z', readings: { Fe: 3 } };

  it('rejects a sample drawn more than a day ahead of the clock, and accepts one just inside', () => {
    const ahead = validateResult({ ...event, sampledAt: '2026-03-03T00:00:01Z' }, { now: NOW });
    expect(ahead).toMatchObject({ ok: false, issues: [{ path: 'sampledAt', reason: expect.stringMatching(/^lies in the future/) }] });
    expect(validateResult({ ...event, sampledAt: '2026-03-02T23:59:59Z' }, { now: NOW }).ok).toBe(true);
  });

  it('gives every record of a batch an outcome and echoes the sampleId of a rejected one', () => {
    const { outcomes, accepted } = validateBatch([event, { ...event, sampleId: 'L-2', readings: { Zz: 1 } }, 42], { now: NOW });
    expect(outcomes).toEqual([
      { index: 0, sampleId: 'L-1', status: 'accepted' },
      { index: 1, sampleId: 'L-2', status: 'rejected', errors: [{ path: 'readings.Zz', reason: 'unknown measurand (see the measurand catalogue in the README)' }] },
      { index: 2, status: 'rejected', errors: [expect.objectContaining({ path: '' })] },
    ]);
    expect(accepted.map((a) => a.index)).toEqual([0]);
  });
});
