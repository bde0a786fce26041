/**
 * A result file that cannot be read (here a directory named like one: it opens, and every read fails) is an input
 * error: one line "wearshift: FILE: cannot read the file: reason", exit 2, no stack trace — for import (plain and
 * through a lab mapping), replay and backtest alike.
 */
import { mkdirSync, mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { afterAll, describe, expect, it } from 'vitest';
import { runCli } from '../helpers/cli.ts';

const dir = mkdtempSync(join(tmpdir(), 'wearshift-unreadable-'));
afterAll(() => rmSync(dir, { recursive: true, force: true }));
const csvDir = join(dir, 'results.csv');
const jsonlDir = join(dir, 'results.jsonl');
const xlsxDir = join(dir, 'lab.xlsx');
for (const d of [csvDir, jsonlDir, xlsxDir]) mkdirSync(d);
const labMaps = fileURLToPath(new URL('../../demo/labs/', import.meta.url));

function expectReadError(r: { code: number | null; stderr: string }, file: string): void {
  expect(r.stderr.trim()).toBe(`wearshift: ${file}: cannot read the file: EISDIR: illegal operation on a directory, read`);
  expect(r.code).toBe(2);
}

// Each case starts the real command line (a Node process, through tsx after an edit): generous bounds, no timing.
describe('a result file that cannot be read', { timeout: 600_000 }, () => {
  it('import --dry-run of a CSV and of a JSONL "file"', async () => {
    expectReadError(await runCli(['import', '--dry-run', csvDir]), csvDir);
    expectReadError(await runCli(['import', '--dry-run', jsonlDir]), jsonlDir);
  });

  it('import --map of a CSV and of an .xlsx "file"', async () => {
    expectReadError(await runCli(['import', '--dry-run', '--map', join(labMaps, 'engine-lab.map.yaml'), csvDir]), csvDir);
    expectReadError(await runCli(['import', '--dry-run', '--map', join(labMaps, 'gearbox-lab.map.yaml'), xlsxDir]), xlsxDir);
  });

  it('replay and backtest', async () => {
    expectReadError(await runCli(['replay', csvDir]), csvDir);
    expectReadError(await runCli(['replay', jsonlDir]), jsonlDir);
    expectReadError(await runCli(['backtest', csvDir, '--json']), csvDir);
  });
});
