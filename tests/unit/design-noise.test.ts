/**
 * `wearshift design noise`: the false-alarm incidents per 100 component-years a configuration gives on healthy
 * components, per rule family, checked against published run lengths and normal-tail areas, and the load per
 * responder against the fleet arithmetic.
 */
import { PassThrough } from 'node:stream';
import { Command } from 'commander';
import { describe, expect, it } from 'vitest';
import { designNoise } from '../../src/backtest/designNoise.ts';
import { registerDesign } from '../../src/cli/commands/design.ts';
import { ConfigSchema } from '../../src/domain/config.ts';
import { InputError } from '../../src/domain/errors.ts';

const SAMPLES_PER_YEAR = 8760 / 250;

async function run(args: string[]): Promise<string> {
  const output = new PassThrough();
  let text = '';
  output.on('data', (c: Buffer) => (text += c.toString('utf8')));
  const program = new Command('wearshift').exitOverride();
  registerDesign(program, output);
  await program.parseAsync(['design', 'noise', ...args], { from: 'user' });
  return text;
}

describe('design noise from the configuration', () => {
  it('with the built-in defaults the derivable families add up to the false-alarm budget (1 per component per 5 years = 20 per 100 component-years)', () => {
    const n = designNoise(ConfigSchema.parse({}));
    expect(n.budgetPer100ComponentYears).toBe(20);
    // Change detectors get 1 − peers.budgetShare (0.8) of it: their rise side (wear incidents, split over EWMA and
    // CUSUM) all but detection.fallShare (0.1) of that, their fall side (sampling incidents) the rest; the peers 0.2.
    expect(n.byFamily.ewma.per100ComponentYears! + n.byFamily.cusum.per100ComponentYears!).toBeCloseTo(16 * 0.9, 2);
    expect(n.byFamily.sampling.per100ComponentYears).toBeCloseTo(16 * 0.1, 2);
    expect(n.byFamily.sampling.basis).toMatch(/^at least: the fall side/);
    expect(n.byFamily.population.per100ComponentYears).toBeCloseTo(4, 6);
    expect(n.per100ComponentYears).toBeCloseTo(20, 2);
    for (const f of ['limit', 'rate', 'condition', 'cleanliness'] as const) expect(n.byFamily[f].per100ComponentYears).toBeNull();
    // One-sided charts raise no fall: the rise side has the change detectors' whole share.
    const up = designNoise(ConfigSchema.parse({ detection: { sided: 'up' } }));
    expect(up.byFamily.ewma.per100ComponentYears! + up.byFamily.cusum.per100ComponentYears!).toBeCloseTo(16, 2);
    expect(up.byFamily.sampling.per100ComponentYears).toBeNull();
  });

  it('a CUSUM given as k = 0.5, h = 5 raises about one false signal in 938 samples (Siegmund\'s approximation, NIST/SEMATECH e-Handbook 6.3.2.3.1; Lucas & Crosier 1982 tabulate ~930, from memory)', () => {
    const config = ConfigSchema.parse({ detection: { measurands: ['Fe'], ewma: { enabled: false }, cusum: { k: 0.5, h: 5 } }, population: { peers: { enabled: false } } });
    const n = designNoise(config);
    const siegmund = (Math.exp(2 * 0.5 * (5 + 1.166)) - 2 * 0.5 * (5 + 1.166) - 1) / (2 * 0.25);
    expect(siegmund).toBeCloseTo(938.2, 0);
    const expected = (100 * SAMPLES_PER_YEAR) / siegmund;
    expect(Math.abs(n.byFamily.cusum.per100ComponentYears! - expected) / expected).toBeLessThan(0.02);
    expect(n.byFamily.ewma.per100ComponentYears).toBe(0);
    expect(n.byFamily.population.per100ComponentYears).toBe(0);
  });

  it('a per-sample group limit at mean + 1σ that opens incidents flags 15.87 % of healthy results (standard normal table), far beyond any budget', () => {
    const config = ConfigSchema.parse({
      detection: { measurands: ['Fe'], ewma: { enabled: false }, cusum: { enabled: false } },
      population: { measurands: ['Fe', 'Cu'], opensIncidents: true, peers: { enabled: false } },
    });
    const n = designNoise(config);
    expect(n.byFamily.population.per100ComponentYears).toBeCloseTo(100 * 2 * SAMPLES_PER_YEAR * 0.158655, 1);
    expect(n.per100ComponentYears).toBeGreaterThan(50 * n.budgetPer100ComponentYears);
  });

  it('a group override is used for its group', () => {
    const config = ConfigSchema.parse({ groups: [{ name: 'mills', detection: { budget: { alarms: 1, years: 10 } } }] });
    expect(designNoise(config, { group: 'mills' }).budgetPer100ComponentYears).toBe(10);
    expect(designNoise(config, { group: 'mills' }).per100ComponentYears).toBeCloseTo(10, 2);
  });

  it('the fleet load per tier-0 responder of the policy that covers the group', () => {
    const config = ConfigSchema.parse({
      channels: { email: { from: 'wearshift <alerts@plant.example>', smtp: { host: 'localhost' } } },
      groups: [{ name: 'mills' }],
      escalation: {
        policies: [
          { name: 'mills', match: { groups: ['mills'] }, tiers: [{ afterMinutes: 0, email: ['mill@plant.example'] }, { afterMinutes: 60, email: ['lead@plant.example'] }] },
          { name: 'samples', match: { kinds: ['sampling'] }, tiers: [{ afterMinutes: 0, email: ['lab@plant.example'] }] },
        ],
      },
    });
    const n = designNoise(config, { group: 'mills', components: 45 });
    // 20 per 100 component-years × 45 components = 9 a year.
    expect(n.fleet!.incidentsPerDay).toBeCloseTo(9 / 365.25, 4);
    expect(n.fleet!.incidentsPerWeek).toBeCloseTo((9 * 7) / 365.25, 4);
    expect(n.fleet!.responders).toEqual(['email:mill@plant.example']);
    expect(n.fleet!.perResponderPerDay).toBeLessThan(n.fleet!.acceptablePerDay);
    expect(designNoise(config, { components: 45 }).fleet!.responders).toEqual([]);
  });
});

describe('wearshift design noise', () => {
  it('prints one JSON object with a row for the top level and each group', async () => {
    const out = JSON.parse((await run(['--json', '--components', '10'])).trim()) as { method: string; rows: { group: string; per100ComponentYears: number; fleet: { components: number } }[] };
    expect(out.method).toBe('noise');
    expect(out.rows.map((r) => r.group)).toEqual(['(top level)']);
    expect(out.rows[0]!.fleet.components).toBe(10);
  });

  it('prints a table with the advisory line, and refuses an unknown group or a fractional fleet', async () => {
    const text = await run([]);
    expect(text).toMatch(/CUSUM\s+7\.2/);
    expect(text).toMatch(/sampling check\s+1\.6/);
    expect(text).toContain('wearshift advises');
    await expect(run(['--group', 'nope'])).rejects.toThrow(InputError);
    await expect(run(['--components', '2.5'])).rejects.toThrow(/whole number/);
  });
});
