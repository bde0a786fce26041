import { spawnSync } from 'node:child_process';
import { PassThrough, Readable } from 'node:stream';
import { fileURLToPath } from 'node:url';
import { Command } from 'commander';
import { describe, expect, it } from 'vitest';
import { cusumChart } from '../../src/analysis/cusum.ts';
import { ewmaChart } from '../../src/analysis/ewma.ts';
import { registerChart } from '../../src/cli/commands/chart.ts';
import { InputError } from '../../src/domain/errors.ts';

const BIN = fileURLToPath(new URL('../../bin/wearshift.js', import.meta.url));

async function runChart(args: string[], stdin: string): Promise<string> {
  const output = new PassThrough();
  let text = '';
  output.on('data', (c: Buffer) => (text += c.toString('utf8')));
  const program = new Command('wearshift').exitOverride();
  registerChart(program, { input: Readable.from([stdin]), output });
  await program.parseAsync(['chart', ...args], { from: 'user' });
  return text;
}

function jsonLines(text: string): Record<string, unknown>[] {
  return text.trim().split('\n').map((line) => JSON.parse(line) as Record<string, unknown>);
}

// Montgomery's tabular CUSUM example (from memory; see tests/reference/cusum.test.ts): target 10, σ = 1, k = 0.5, h = 5.
const MONTGOMERY = '9.45 7.99 9.29 11.66 12.16 10.18 8.04 11.46 9.20 10.34\n9.03 11.47 10.51 9.40 10.08 9.37 10.62 10.31 8.52 10.84\n10.90,9.33,12.29,11.50,10.60,11.08,10.38,11.62,11.31,10.52\n';

describe('wearshift chart cusum', () => {
  it('prints one JSON line per point in the documented format, matching cusumChart', async () => {
    const lines = jsonLines(await runChart(['cusum', '--target', '10', '--sigma', '1', '--k', '0.5', '--h', '5', '--json'], MONTGOMERY));
    // The design brief's example line for the first point.
    expect(lines[0]).toEqual({ index: 1, value: 9.45, upper: 0, lower: 0.05, signal: null });
    const values = MONTGOMERY.split(/[\s,]+/).filter(Boolean).map(Number);
    const expected = cusumChart(values, 10, 1, { k: 0.5, h: 5 });
    expect(lines).toHaveLength(30);
    lines.forEach((line, i) => {
      expect(Object.keys(line)).toEqual(['index', 'value', 'upper', 'lower', 'signal']);
      expect(line.index).toBe(expected[i]!.index);
      expect(line.value).toBe(expected[i]!.value);
      expect(line.upper as number).toBeCloseTo(expected[i]!.upper, 10);
      expect(line.lower as number).toBeCloseTo(expected[i]!.lower, 10);
      expect(line.signal).toBe(expected[i]!.signal);
    });
    expect(lines[28]!.signal).toBe('up');
  });

  it('starts from the headstart', async () => {
    const lines = jsonLines(await runChart(['cusum', '--target', '0', '--sigma', '2', '--k', '0.5', '--h', '4', '--headstart', '0.5', '--json'], '0'));
    expect(lines[0]).toMatchObject({ upper: 1.5, lower: 1.5 });
  });

  it('prints an aligned table and where it first signalled', async () => {
    const text = await runChart(['cusum', '--target', '10', '--sigma', '1', '--k', '0.5', '--h', '5'], MONTGOMERY);
    const rows = text.trim().split('\n');
    expect(rows[0]).toMatch(/^point\s+value\s+C\+\s+C−\s+signal$/);
    expect(rows).toHaveLength(2 + 30 + 1);
    expect(rows[2 + 28]).toMatch(/^29\s+11\.31\s+5\.28\s+0\s+up$/);
    expect(rows.at(-1)).toBe('first signal at point 29 (up)');
  });

  it('names the position of a token that is not a number', async () => {
    await expect(runChart(['cusum', '--target', '0', '--sigma', '1', '--k', '0.5', '--h', '4'], '1, 2\n3 x4 5')).rejects.toThrow(
      new InputError('stdin: token 4 (line 2) is not a number: "x4"'),
    );
    await expect(runChart(['cusum', '--target', '0', '--sigma', '1', '--k', '0.5', '--h', '4'], ' \n ')).rejects.toThrow(InputError);
    await expect(runChart(['cusum', '--target', '0', '--sigma', '0', '--k', '0.5', '--h', '4'], '1')).rejects.toThrow(InputError);
  });
});

describe('wearshift chart ewma', () => {
  const NIST = '52.0 47.0 53.0 49.3 50.1 47.0 51.0 50.1 51.2 50.5 49.6 47.6 49.9 51.3 47.8 51.2 52.6 52.4 53.6 52.1';

  it('prints JSON lines with exact limits by default, matching ewmaChart', async () => {
    const lines = jsonLines(await runChart(['ewma', '--target', '50', '--sigma', '2.0539', '--lambda', '0.3', '--L', '3', '--json'], NIST));
    const expected = ewmaChart(NIST.split(' ').map(Number), 50, 2.0539, { lambda: 0.3, L: 3 });
    lines.forEach((line, i) => {
      expect(Object.keys(line)).toEqual(['index', 'value', 'ewma', 'ucl', 'lcl', 'signal']);
      for (const key of ['ewma', 'ucl', 'lcl'] as const) expect(line[key] as number).toBeCloseTo(expected[i]![key], 9);
      expect(line.signal).toBeNull();
    });
    expect(lines[0]!.ucl).not.toBeCloseTo(lines[19]!.ucl as number, 3);
  });

  it('uses the steady-state limits with --steady-limits (NIST/SEMATECH 6.3.2.4: UCL 52.5884)', async () => {
    const lines = jsonLines(await runChart(['ewma', '--target', '50', '--sigma', '2.0539', '--lambda', '0.3', '--L', '3', '--steady-limits', '--json'], NIST));
    for (const line of lines) expect(Math.abs((line.ucl as number) - 52.5884)).toBeLessThan(1e-4);
  });

  it('says so when nothing signalled', async () => {
    const text = await runChart(['ewma', '--target', '50', '--sigma', '2.0539', '--lambda', '0.3', '--L', '3'], NIST);
    expect(text.trim().split('\n').at(-1)).toBe('no signal in 20 points');
  });
});

describe('the wearshift command with stdin', () => {
  it('reads the series from its stdin; a bad token exits 2 with a clear message and no output', () => {
    const bad = spawnSync(process.execPath, [BIN, 'chart', 'ewma', '--target', '0', '--sigma', '1', '--lambda', '0.2', '--L', '3'], { input: '1 2\n three', encoding: 'utf8' });
    expect(bad.stderr).toBe('wearshift: stdin: token 3 (line 2) is not a number: "three"\n');
    expect(bad.status).toBe(2);
    expect(bad.stdout).toBe('');
  }, 30_000);
});
