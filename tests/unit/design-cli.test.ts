import { PassThrough } from 'node:stream';
import { Command } from 'commander';
import { afterEach, describe, expect, it, vi } from 'vitest';
import { cusumArl } from '../../src/analysis/arl/cusumArl.ts';
import { ewmaArl } from '../../src/analysis/arl/ewmaArl.ts';
import { registerDesign } from '../../src/cli/commands/design.ts';
import { main } from '../../src/cli/main.ts';
import { InputError } from '../../src/domain/errors.ts';

async function runDesign(args: string[]): Promise<string> {
  const output = new PassThrough();
  let text = '';
  output.on('data', (c: Buffer) => (text += c.toString('utf8')));
  const program = new Command('wearshift').exitOverride();
  registerDesign(program, output);
  await program.parseAsync(['design', ...args], { from: 'user' });
  return text;
}

async function designJson(args: string[]): Promise<Record<string, unknown>> {
  const lines = (await runDesign([...args, '--json'])).trim().split('\n');
  expect(lines).toHaveLength(1);
  return JSON.parse(lines[0]!) as Record<string, unknown>;
}

afterEach(() => {
  vi.restoreAllMocks();
  vi.unstubAllEnvs();
});

describe('wearshift design cusum', () => {
  it('prints run lengths in the documented JSON shape, two-sided and zero-state by default', async () => {
    const out = await designJson(['cusum', '--k', '0.5', '--h', '5', '--shifts', '0,1']);
    expect(out).toMatchObject({ method: 'cusum', sided: 'two', k: 0.5, h: 5, headstart: 0 });
    const arl = out.arl as { shift: number; arl: number }[];
    expect(arl.map((r) => r.shift)).toEqual([0, 1]);
    expect(arl[0]!.arl).toBeCloseTo(cusumArl({ k: 0.5, h: 5, shift: 0, sided: 'two' }), 6);
    // NIST/SEMATECH e-Handbook 6.3.2.3.1 gives 10.4 for the one-sided chart at 1σ; the lower side adds almost nothing there.
    expect(Math.abs(arl[1]!.arl - 10.4) / 10.4).toBeLessThan(0.01);
  });

  it('reproduces the Lucas & Crosier (1982) FIR row with --headstart 0.5 at the table shifts by default', async () => {
    const out = await designJson(['cusum', '--h', '4', '--headstart', '0.5']);
    const table = [149, 62.7, 20.1, 8.97, 5.29, 2.86, 2.01, 1.59, 1.32, 1.07, 1.01];
    (out.arl as { arl: number }[]).forEach((r, i) => expect(Math.abs(r.arl - table[i]!) / table[i]!).toBeLessThan(0.01));
  });

  it('solves h for a target ARL0 (NIST/SEMATECH 6.3.2.3.1: one-sided k = 0.5, ARL0 930 → h ≈ 5)', async () => {
    const out = await designJson(['cusum', '--k', '0.5', '--arl0', '930', '--sided', 'one', '--shifts', '0']);
    expect(out).toMatchObject({ method: 'cusum', sided: 'one', arl0: 930 });
    expect(out.h as number).toBeCloseTo(5, 2);
    expect((out.arl as { arl: number }[])[0]!.arl).toBeCloseTo(930, 4);
  });

  it('derives ARL0 from a false-alarm budget, prints the conversion, then solves h', async () => {
    const out = await designJson(['cusum', '--budget', '1 per component per 5 years', '--every', '250', '--charts', '14', '--share', '1', '--sided', 'two', '--shifts', '0']);
    expect(out.budget).toEqual({ alarms: 1, years: 5, sampleIntervalHours: 250, hoursPerYear: 8760, samplesPerComponent: 175.2, componentArl0: 175.2, charts: 14, share: 1, arl0: 2452.8 });
    expect(out.arl0).toBeCloseTo(2452.8, 8);
    expect(cusumArl({ k: 0.5, h: out.h as number, shift: 0, sided: 'two' })).toBeCloseTo(2452.8, 4);

    const text = await runDesign(['cusum', '--budget', '2 per component per year', '--every', '500', '--hours-per-year', '4000', '--charts', '1', '--share', '1']);
    expect(text).toContain('1 × 4000 / 500 = 8 samples per component; / 2 = component in-control ARL 4');
    expect(text).toMatch(/decision interval h = [\d.]+ for an in-control ARL of 4 samples\n/);
    // Run lengths in samples and, with the sample interval known, in operating hours (ARL × 500 h).
    expect(text).toMatch(/ARL \(samples\)\s+ARL \(operating hours, a sample every 500 h\)/);
    expect(text).toMatch(/^0\s+4\s+2000$/m);
    expect(text).toContain('wearshift advises');
  });

  it('with a budget, answers the h and L the worker uses with the configuration: its charts, budget share and one-sided design', async () => {
    const { loadConfig } = await import('../../src/runtime/loadConfig.ts');
    const { changeDesign } = await import('../../src/analysis/budget.ts');
    const config = loadConfig(new URL('../../demo/config.yaml', import.meta.url).pathname);
    const detection = { ...config.detection, budget: { ...config.detection.budget, sampleIntervalHours: 250 } };
    // The rise side: an upward signal opens a wear incident (a fall has its own part of the budget).
    const worker = changeDesign(detection, config.population).rise;
    const demo = new URL('../../demo/config.yaml', import.meta.url).pathname;
    const cusum = await designJson(['cusum', '--budget', '1 per component per 5 years', '--every', '250', '--config', demo, '--shifts', '0']);
    expect(cusum).toMatchObject({ sided: 'one' });
    expect((cusum.budget as { charts: number }).charts).toBe(worker.charts);
    expect(cusum.h as number).toBeCloseTo(worker.cusumH, 6);
    const ewma = await designJson(['ewma', '--budget', '1 per component per 5 years', '--every', '250', '--config', demo, '--shifts', '0']);
    expect(ewma).toMatchObject({ sided: 'one', limits: 'exact', lambda: config.detection.ewma.lambda });
    expect(ewma.L as number).toBeCloseTo(worker.ewmaL, 6);
    const text = await runDesign(['cusum', '--budget', '1 per component per 5 years', '--every', '250', '--config', demo]);
    expect(text).toContain(`a "chart" is one wear metal watched by one detector`);
  });

  it('without --config or --charts, follows the built-in configuration the worker runs with (its 14 charts), not one chart', async () => {
    vi.stubEnv('WEARSHIFT_CONFIG', undefined);
    const { ConfigSchema } = await import('../../src/domain/config.ts');
    const { changeDesign } = await import('../../src/analysis/budget.ts');
    const config = ConfigSchema.parse({});
    const detection = { ...config.detection, budget: { ...config.detection.budget, sampleIntervalHours: 250 } };
    // The rise side: an upward signal opens a wear incident (a fall has its own part of the budget).
    const worker = changeDesign(detection, config.population).rise;
    expect(worker.charts).toBe(14);
    // The command the reliability engineer typed: once it answered the h of a single chart, far below the worker's.
    const cusum = await designJson(['cusum', '--budget', '1 per component per 5 years', '--every', '250', '--shifts', '0']);
    expect((cusum.budget as { charts: number }).charts).toBe(14);
    expect(cusum.h as number).toBeCloseTo(worker.cusumH, 6);
    const oneChart = await designJson(['cusum', '--budget', '1 per component per 5 years', '--every', '250', '--charts', '1', '--shifts', '0']);
    expect(cusum.h as number).toBeGreaterThan(oneChart.h as number);
  });

  it('prints a table of run lengths without --json, with "> 1e9" for a run that never ends in practice', async () => {
    const text = await runDesign(['cusum', '--h', '4', '--sided', 'one', '--shifts', '-3,0']);
    expect(text).toMatch(/^-3\s+> 1e9$/m);
    expect(text).toMatch(/^0\s+335\.4$/m);
    expect(text).toContain('ARL (samples)');
    expect((await designJson(['cusum', '--h', '4', '--sided', 'one', '--shifts', '-3'])).arl).toEqual([{ shift: -3, arl: null }]);
  });

  it('refuses contradictory or out-of-range requests as input errors', async () => {
    await expect(runDesign(['cusum', '--h', '4', '--arl0', '500'])).rejects.toThrow(InputError);
    await expect(runDesign(['cusum'])).rejects.toThrow(/exactly one of --h, --arl0 or --budget/);
    await expect(runDesign(['cusum', '--arl0', '500', '--every', '100'])).rejects.toThrow(/--every applies only with --budget/);
    await expect(runDesign(['cusum', '--h', '4', '--headstart', '1'])).rejects.toThrow(InputError);
    await expect(runDesign(['cusum', '--budget', 'now and then'])).rejects.toThrow(InputError);
    await expect(runDesign(['cusum', '--k', 'abc', '--h', '4'])).rejects.toThrow(/--k expects a number/);
  });
});

describe('wearshift design ewma', () => {
  it('solves L for a target ARL0 with steady-state limits (Lucas & Saccucci 1990: λ = 0.5 → 3.071)', async () => {
    const out = await designJson(['ewma', '--lambda', '0.5', '--arl0', '500', '--shifts', '0,1']);
    expect(out).toMatchObject({ method: 'ewma', sided: 'two', lambda: 0.5, limits: 'steady', arl0: 500 });
    expect(out.L as number).toBeCloseTo(3.071, 3);
    // Lucas & Saccucci (1990): 17.5 at a 1σ shift.
    expect(Math.abs((out.arl as { arl: number }[])[1]!.arl - 17.5) / 17.5).toBeLessThan(0.01);
  });

  it('gives the ARLs of a given L, and designs for exact limits with --exact-limits', async () => {
    const given = await designJson(['ewma', '--lambda', '0.1', '--L', '2.8', '--shifts', '0,1']);
    expect((given.arl as { arl: number }[])[1]!.arl).toBeCloseTo(ewmaArl({ lambda: 0.1, L: 2.8, shift: 1, sided: 'two' }), 6);
    const exact = await designJson(['ewma', '--lambda', '0.2', '--arl0', '500', '--exact-limits', '--sided', 'one', '--shifts', '0']);
    expect(exact).toMatchObject({ limits: 'exact', sided: 'one' });
    expect(ewmaArl({ lambda: 0.2, L: exact.L as number, shift: 0, sided: 'one', exactLimits: true })).toBeCloseTo(500, 4);
  });

  it('is registered in the wearshift program and writes to stdout', async () => {
    const written: string[] = [];
    vi.spyOn(process.stdout, 'write').mockImplementation((chunk: string | Uint8Array) => {
      written.push(String(chunk));
      return true;
    });
    const code = await main(['design', 'ewma', '--lambda', '0.1', '--arl0', '500', '--json']);
    vi.restoreAllMocks();
    expect(code).toBe(0);
    const out = JSON.parse(written.join('')) as Record<string, unknown>;
    expect(Object.keys(out)).toEqual(expect.arrayContaining(['L', 'arl0', 'lambda', 'sided', 'limits']));
    expect(ewmaArl({ lambda: 0.1, L: out.L as number, shift: 0, sided: 'two' })).toBeCloseTo(500, 4);
  });

  it('exits 2 through main on a bad request', async () => {
    const errors: string[] = [];
    vi.spyOn(process.stderr, 'write').mockImplementation((chunk: string | Uint8Array) => {
      errors.push(String(chunk));
      return true;
    });
    const code = await main(['design', 'ewma', '--lambda', '1.5', '--L', '3']);
    vi.restoreAllMocks();
    expect(code).toBe(2);
    expect(errors.join('')).toBe('wearshift: EWMA smoothing constant lambda must be in (0, 1], got 1.5\n');
  });
});
