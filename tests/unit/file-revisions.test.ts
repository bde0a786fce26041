/**
 * Re-issued results within one file: the same sampleId and revision again is a repeat when the content is the same
 * (taken once) and a conflict when it differs (refused, naming the earlier record) — for import (FileRevisions over
 * the whole file) and for replay and backtest (the in-memory store's answer, counted as a rejected record).
 */
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { runCli } from '../helpers/cli.ts';
import { ConfigSchema } from '../../src/domain/config.ts';
import { validateResult } from '../../src/intake/validate.ts';
import type { SourceRecord } from '../../src/intake/fileRecords.ts';
import { FileRevisions } from '../../src/pipeline/fileRevisions.ts';
import { replayRecords, type RejectedRecord } from '../../src/pipeline/replay.ts';

const NOW = Date.parse('2026-06-01T00:00:00Z');
const base = { sampleId: 'S-1', unit: 'PS1', component: 'gearbox', sampledAt: '2026-03-01T08:00:00Z', oilHours: 250, readings: { Fe: 12, Cu: 3 } };

function sample(event: Record<string, unknown>) {
  const parsed = validateResult(event, { now: NOW });
  if (!parsed.ok) throw new Error(JSON.stringify(parsed.issues));
  return parsed.sample;
}

describe('FileRevisions', () => {
  it('takes the same result again as a repeat of the first line, whatever the order of its readings', () => {
    const seen = new FileRevisions('line');
    expect(seen.check(2, sample(base))).toEqual({ kind: 'first' });
    expect(seen.check(9, sample({ ...base, readings: { Cu: 3, Fe: 12 } }))).toEqual({ kind: 'duplicate', of: 2 });
    // Still named after the first line, not the latest repeat.
    expect(seen.check(12, sample(base))).toEqual({ kind: 'duplicate', of: 2 });
  });

  it('refuses one sampleId and revision under two spellings (letter case) of a unit or component, naming both', () => {
    const seen = new FileRevisions('line');
    expect(seen.check(1, sample(base))).toEqual({ kind: 'first' });
    expect(seen.check(2, sample({ ...base, unit: 'ps1' }))).toEqual({
      kind: 'conflict',
      of: 1,
      reason: 'sample S-1 revision 0 is on line 1 under PS1 / gearbox, here under ps1 / gearbox; the names differ only in letter case, which makes another component: write them one way',
    });
    expect(seen.check(3, sample({ ...base, component: 'Gearbox' }))).toMatchObject({ kind: 'conflict', of: 1 });
    // Its revision, and other samples of the unit, are no conflict; the first spelling stays the owner.
    expect(seen.check(4, sample({ ...base, revision: 1, readings: { Fe: 13, Cu: 3 } }))).toEqual({ kind: 'first' });
    expect(seen.check(5, sample({ ...base, sampleId: 'S-2', unit: 'ps1' }))).toEqual({ kind: 'first' });
    expect(seen.check(6, sample(base))).toEqual({ kind: 'duplicate', of: 1 });
  });

  it('refuses other content under the same sampleId and revision, naming both records and the way out', () => {
    const seen = new FileRevisions('row');
    seen.check(4, sample(base));
    const verdict = seen.check(7, sample({ ...base, readings: { Fe: 99, Cu: 3 } }));
    expect(verdict).toEqual({
      kind: 'conflict',
      of: 4,
      reason: 'sample S-1 revision 0 is already on row 4 with different content; a correction needs a higher revision (e.g. 1)',
    });
    // Any field counts, not only readings.
    expect(seen.check(8, sample({ ...base, oilHours: 260 }))).toMatchObject({ kind: 'conflict', of: 4 });
  });

  it('keeps a higher revision, and the same sampleId on another component, apart (as the store does)', () => {
    const seen = new FileRevisions();
    seen.check(2, sample(base));
    expect(seen.check(3, sample({ ...base, revision: 1, readings: { Fe: 99 } }))).toEqual({ kind: 'first' });
    expect(seen.check(4, sample({ ...base, component: 'engine', readings: { Fe: 99 } }))).toEqual({ kind: 'first' });
  });
});

describe('replay of a file with a re-issued result', () => {
  it('counts a conflicting repeat as rejected, names both lines, and keeps the first; an identical repeat is no rejection', async () => {
    const records: SourceRecord[] = [
      { line: 2, record: base },
      { line: 3, record: { ...base, sampleId: 'S-2', sampledAt: '2026-04-01T08:00:00Z', oilHours: 500, readings: { Fe: 13, Cu: 3 } } },
      { line: 4, record: { ...base, readings: { Fe: 99, Cu: 3 } } },
      { line: 5, record: { ...base, readings: { Cu: 3, Fe: 12 } } },
    ];
    const rejected: RejectedRecord[] = [];
    const outcome = await replayRecords(records, { config: ConfigSchema.parse({}), now: NOW, onRejected: (r) => rejected.push(r) });
    expect(outcome.records).toBe(4);
    expect(outcome.rejected).toBe(1);
    expect(rejected).toEqual([
      { line: 4, sampleId: 'S-1', errors: [{ path: 'revision', reason: 'sample S-1 revision 0 is already on line 2 with different content; a correction needs a higher revision (e.g. 1)' }] },
    ]);
    const [stored] = await outcome.store.samplesAfter({ unit: 'PS1', component: 'gearbox' }, null);
    expect(stored!.sample.readings.Fe).toEqual({ kind: 'value', value: 12 });
  });
});

describe('wearshift replay and backtest of a file with a conflicting re-issue', { timeout: 600_000 }, () => {
  const dir = mkdtempSync(join(tmpdir(), 'wearshift-reissued-'));
  afterAll(() => rmSync(dir, { recursive: true, force: true }));

  it('replay reports the line and exits 1; backtest --json counts it rejected and exits 1', async () => {
    const file = join(dir, 'reissued.jsonl');
    writeFileSync(file, [base, { ...base, sampleId: 'S-2', sampledAt: '2026-04-01T08:00:00Z', oilHours: 500 }, { ...base, readings: { Fe: 99, Cu: 3 } }].map((e) => JSON.stringify(e)).join('\n'));
    const line3 = 'line 3 (sampleId S-1): revision: sample S-1 revision 0 is already on line 1 with different content; a correction needs a higher revision (e.g. 1)';
    const replay = await runCli(['replay', file, '--now', '2026-06-01T00:00:00Z']);
    expect(replay.stderr).toContain(`${line3}\n`);
    expect(replay.stderr).toContain(`${file}: 3 records, 1 rejected`);
    expect(replay.code).toBe(1);
    const backtest = await runCli(['backtest', file, '--json', '--now', '2026-06-01T00:00:00Z']);
    expect(backtest.stderr).toContain(`${line3}\n`);
    expect(JSON.parse(backtest.stdout)).toMatchObject({ records: 3, rejected: 1 });
    expect(backtest.code).toBe(1);
  });
});
