import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
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

/** A configuration file in a fresh temporary directory; removed with `dispose`. */
function configFile(yaml: string): { path: string; dispose: () => void } {
  const dir = mkdtempSync(join(tmpdir(), 'wearshift-design-'));
  const path = join(dir, 'config.yaml');
  writeFileSync(path, yaml);
  return { path, dispose: () => rmSync(dir, { recursive: true, force: true }) };
}

/** What main writes to stdout and stderr, and its exit code. */
async function runMain(args: string[]): Promise<{ code: number; stdout: string; stderr: string }> {
  const out: string[] = [];
  const err: string[] = [];
  vi.spyOn(process.stdout, 'write').mockImplementation((chunk: string | Uint8Array) => {
    out.push(String(chunk));
    return true;
  });
  vi.spyOn(process.stderr, 'write').mockImplementation((chunk: string | Uint8Array) => {
    err.push(String(chunk));
    return true;
  });
  try {
    const code = await main(args);
    return { code, stdout: out.join(''), stderr: err.join('') };
  } finally {
    vi.restoreAllMocks();
  }
}

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

    const text = await runDesign(['cusum', '--budget', '2 per component per year', '--every', '50', '--hours-per-year', '4000', '--charts', '1', '--share', '1']);
    expect(text).toContain('1 × 4000 / 50 = 80 samples per component; / 2 = component in-control ARL 40');
    expect(text).toMatch(/decision interval h = [\d.]+ for an in-control ARL of 40 samples\n/);
    // Run lengths in samples and, with the sample interval known, in operating hours (ARL × 50 h).
    expect(text).toMatch(/ARL \(samples\)\s+ARL \(operating hours, a sample every 50 h\)/);
    expect(text).toMatch(/^0\s+40\s+2000$/m);
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

  it('with a budget and no --every / --hours-per-year, counts with the configuration\'s sample interval and hours per year, as the worker does', async () => {
    vi.stubEnv('WEARSHIFT_CONFIG', undefined);
    const file = configFile('detection:\n  budget: { alarms: 1, years: 5, sampleIntervalHours: 500, hoursPerYear: 6000 }\n');
    try {
      const { loadConfig } = await import('../../src/runtime/loadConfig.ts');
      const { changeDesign } = await import('../../src/analysis/budget.ts');
      const config = loadConfig(file.path);
      const worker = changeDesign(config.detection, config.population).rise;
      // 5 × 6000 / 500 = 60 samples per component, not 5 × 8760 / 250 = 175.2.
      const cusum = await designJson(['cusum', '--budget', '1 per component per 5 years', '--config', file.path, '--shifts', '0']);
      expect(cusum.budget).toMatchObject({ sampleIntervalHours: 500, hoursPerYear: 6000, samplesPerComponent: 60, charts: 14 });
      expect(cusum.h as number).toBeCloseTo(worker.cusumH, 6);
      const ewma = await designJson(['ewma', '--budget', '1 per component per 5 years', '--config', file.path, '--shifts', '0']);
      expect(ewma.L as number).toBeCloseTo(worker.ewmaL, 6);
      const text = await runDesign(['cusum', '--budget', '1 per component per 5 years', '--config', file.path]);
      expect(text).toContain('a sample every 500 operating hours (detection.budget.sampleIntervalHours of the configuration), 6000 hours per year (detection.budget.hoursPerYear of the configuration)');
      expect(text).toContain('ARL (operating hours, a sample every 500 h)');
      // An option given still wins over the configuration.
      const given = await designJson(['cusum', '--budget', '1 per component per 5 years', '--config', file.path, '--every', '250', '--hours-per-year', '8760', '--shifts', '0']);
      expect(given.budget).toMatchObject({ sampleIntervalHours: 250, hoursPerYear: 8760, samplesPerComponent: 175.2 });
      expect(given.h as number).toBeGreaterThan(cusum.h as number);
    } finally {
      file.dispose();
    }
  });

  it('with --group, follows the group\'s resolved detection settings; an unknown group is a usage error naming it', async () => {
    vi.stubEnv('WEARSHIFT_CONFIG', undefined);
    const file = configFile(
      [
        'detection:',
        '  budget: { sampleIntervalHours: 500, hoursPerYear: 6000 }',
        'groups:',
        '  - name: mills',
        '    detection: { measurands: [Fe, Cu], budget: { sampleIntervalHours: 100 }, cusum: { k: 0.75 }, ewma: { lambda: 0.1 } }',
        '',
      ].join('\n'),
    );
    try {
      const { loadConfig } = await import('../../src/runtime/loadConfig.ts');
      const { changeDesign } = await import('../../src/analysis/budget.ts');
      const { resolveSettings } = await import('../../src/domain/settings.ts');
      const s = resolveSettings(loadConfig(file.path), { unit: 'M1', component: 'gearbox', group: 'mills' });
      const worker = changeDesign(s.detection, s.population).rise;
      const cusum = await designJson(['cusum', '--budget', '1 per component per 5 years', '--config', file.path, '--group', 'mills', '--shifts', '0']);
      // The group's own sample interval, the top level's hours per year, the group's 2 metals × 2 detectors and k.
      expect(cusum).toMatchObject({ group: 'mills', k: 0.75, budget: { sampleIntervalHours: 100, hoursPerYear: 6000, samplesPerComponent: 300, charts: 4 } });
      expect(cusum.h as number).toBeCloseTo(worker.cusumH, 6);
      const ewma = await designJson(['ewma', '--budget', '1 per component per 5 years', '--config', file.path, '--group', 'mills', '--shifts', '0']);
      expect(ewma).toMatchObject({ lambda: 0.1 });
      expect(ewma.L as number).toBeCloseTo(worker.ewmaL, 6);
      expect(await runDesign(['ewma', '--budget', '1 per component per 5 years', '--config', file.path, '--group', 'mills'])).toContain('group mills watches 2 wear metal(s)');

      await expect(runDesign(['cusum', '--budget', '1 per component per 5 years', '--config', file.path, '--group', 'nope'])).rejects.toThrow(`--group: no group "nope" in ${file.path} (groups: mills)`);
      await expect(runDesign(['cusum', '--arl0', '500', '--group', 'mills'])).rejects.toThrow(/--group applies only with --budget/);
      const refused = await runMain(['design', 'cusum', '--budget', '1 per component per 5 years', '--config', file.path, '--group', 'nope']);
      expect(refused.code).toBe(2);
      expect(refused.stderr).toBe(`wearshift: --group: no group "nope" in ${file.path} (groups: mills)\n`);
    } finally {
      file.dispose();
    }
  });

  it('refuses a budget no chart limit can meet as a usage error naming --budget, exit 2, not a stack trace', async () => {
    vi.stubEnv('WEARSHIFT_CONFIG', undefined);
    // 35.04 samples a year / 1000 alarms × 14 charts / 0.72: 0.68 samples per false alarm of a chart.
    await expect(runDesign(['cusum', '--budget', '1000 per component per year'])).rejects.toThrow(InputError);
    const low = await runMain(['design', 'cusum', '--budget', '1000 per component per year']);
    expect(low.code).toBe(2);
    expect(low.stderr).toMatch(/^wearshift: --budget "1000 per component per year" gives each chart an in-control run length of 0\.6813 samples \(.*\); chart limits can be derived for 20 to 100000000 samples: allow fewer false alarms or a longer period\n$/);
    // 200000 × 35.04 × 14 / 0.72 = 136 million samples, past where the run-length equations stay reliable.
    const high = await runMain(['design', 'ewma', '--budget', '1 per component per 200000 years']);
    expect(high.code).toBe(2);
    expect(high.stderr).toMatch(/^wearshift: --budget "1 per component per 200000 years" gives each chart an in-control run length of 136300000 samples .*allow more false alarms or a shorter period\n$/);
    expect(high.stderr).not.toMatch(/\n\s+at /);
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
    expect(errors.join('')).toBe('wearshift: --lambda must be from 0.01 to 1 (the range of the published EWMA design tables), got 1.5\n');
  });
});
