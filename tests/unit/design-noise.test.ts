/**
 * `wearshift design noise`: the false-alarm incidents per 100 component-years a configuration gives on healthy
 * components, per rule family, checked against published run lengths and normal-tail areas, and the load per
 * responder against the fleet arithmetic.
 */
import { PassThrough } from 'node:stream';
import { Command } from 'commander';
import { describe, expect, it } from 'vitest';
import { designNoise, type ResponderNoise } from '../../src/backtest/designNoise.ts';
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
    // Above mean + 2σ (2.275 %, standard normal table) the finding is an alarm; between the levels a caution.
    const bySeverity = Object.fromEntries(n.loads.map((l) => [l.severity, l.per100ComponentYears]));
    expect(bySeverity.alarm).toBeCloseTo(100 * 2 * SAMPLES_PER_YEAR * 0.02275, 1);
    expect(bySeverity.caution).toBeCloseTo(100 * 2 * SAMPLES_PER_YEAR * (0.158655 - 0.02275), 1);
    expect(n.loads.every((l) => l.family === 'population' && l.kind === 'machine')).toBe(true);
  });

  it('says what its total adds and what it leaves out: not the configuration\'s whole noise', () => {
    const n = designNoise(ConfigSchema.parse({}));
    expect(n.total.families).toEqual(['population', 'ewma', 'cusum', 'sampling']);
    expect(n.total.inPart).toEqual(['sampling']);
    expect(n.total.excludes).toEqual(['limit', 'rate', 'condition', 'cleanliness']);
    expect(n.total.basis).toContain('it excludes fixed limit, rate limit, oil condition, cleanliness and the other sampling checks');
    expect(n.total.basis).not.toMatch(/upper bound/);
    // One-sided charts: the sampling family has no figure at all and is left out whole.
    const up = designNoise(ConfigSchema.parse({ detection: { sided: 'up' } }));
    expect(up.total.excludes).toContain('sampling');
    expect(up.total.inPart).toEqual([]);
  });

  it('a group override is used for its group', () => {
    const config = ConfigSchema.parse({ groups: [{ name: 'mills', detection: { budget: { alarms: 1, years: 10 } } }] });
    expect(designNoise(config, { group: 'mills' }).budgetPer100ComponentYears).toBe(10);
    expect(designNoise(config, { group: 'mills' }).per100ComponentYears).toBeCloseTo(10, 2);
  });

  it('the fleet load per tier-0 responder of the policy that matches each part: machine incidents of the group, sampling incidents by kind', () => {
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
    const perDay = (per100: number) => (per100 / 100) * (45 / 365.25);
    // The machine incidents (18.4 per 100 component-years: the rises 14.4, the peers 4) go to the mills policy; the
    // falls (1.6, sampling incidents) to the policy that matches kinds: [sampling], not to the mill.
    expect(n.fleet!.responders.map((r) => r.responder)).toEqual(['email:lab@plant.example', 'email:mill@plant.example']);
    const [lab, mill] = n.fleet!.responders;
    expect(mill!.perDay).toBeCloseTo(perDay(18.4), 5);
    expect(mill!.heardOf.map((h) => h.family).sort()).toEqual(['cusum', 'ewma', 'population']);
    expect(lab!.perDay).toBeCloseTo(perDay(1.6), 5);
    expect(lab!.heardOf).toEqual([{ family: 'sampling', severity: 'watch', kind: 'sampling' }]);
    expect(n.fleet!.unrouted).toBeNull();
    expect(mill!.perDay).toBeLessThan(n.fleet!.acceptablePerDay);
    // Outside the group only the sampling policy matches: the machine incidents are heard of by nobody.
    const top = designNoise(config, { components: 45 }).fleet!;
    expect(top.responders.map((r) => r.responder)).toEqual(['email:lab@plant.example']);
    expect(top.unrouted!.perDay).toBeCloseTo(perDay(18.4), 5);
  });

  it('splits the load by severity: a watch desk hears only of the EWMA and CUSUM rises, a caution/alarm desk of the rest', () => {
    const config = ConfigSchema.parse({
      channels: { email: { from: 'wearshift <alerts@plant.example>', smtp: { host: 'localhost' } } },
      population: { opensIncidents: true, measurands: ['Fe'], sigma: { caution: 3, alarm: 4 } },
      escalation: {
        policies: [
          { name: 'early', match: { severities: ['watch'] }, tiers: [{ afterMinutes: 0, email: ['watch@plant.example'] }] },
          { name: 'levels', match: { severities: ['caution', 'alarm'] }, tiers: [{ afterMinutes: 0, email: ['desk@plant.example'] }] },
        ],
      },
    });
    const n = designNoise(config, { components: 100 });
    const perDay = (per100: number) => (per100 / 100) * (100 / 365.25);
    const share = (family: string, severity?: string) => n.loads.filter((l) => l.family === family && (severity === undefined || l.severity === severity)).reduce((s, l) => s + l.per100ComponentYears, 0);
    const byTarget: Record<string, ResponderNoise> = Object.fromEntries(n.fleet!.responders.map((r) => [r.responder, r]));
    expect(Object.keys(byTarget)).toEqual(['email:desk@plant.example', 'email:watch@plant.example']);
    expect(byTarget['email:watch@plant.example']!.heardOf.map((h) => h.family)).toEqual(['ewma', 'cusum']);
    expect(byTarget['email:watch@plant.example']!.perDay).toBeCloseTo(perDay(share('ewma') + share('cusum')), 6);
    // The comparison with peers and the single results above mean + 3σ are cautions, those above mean + 4σ alarms.
    expect(byTarget['email:desk@plant.example']!.heardOf).toEqual([
      { family: 'population', severity: 'caution', kind: 'machine' },
      { family: 'population', severity: 'alarm', kind: 'machine' },
    ]);
    expect(byTarget['email:desk@plant.example']!.perDay).toBeCloseTo(perDay(share('population')), 6);
    // Neither policy matches sampling incidents (kinds default to machine): the falls are heard of by nobody.
    expect(n.fleet!.unrouted!.heardOf).toEqual([{ family: 'sampling', severity: 'watch', kind: 'sampling' }]);
    expect(n.fleet!.unrouted!.perDay).toBeCloseTo(perDay(share('sampling')), 6);
    // Nobody hears of every incident: the parts add up to the whole.
    const heard = n.fleet!.responders.reduce((s, r) => s + r.perDay, 0) + n.fleet!.unrouted!.perDay;
    expect(heard).toBeCloseTo(n.fleet!.incidentsPerDay, 5);
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
    // The total is what it can derive, not a bound on the configuration's noise.
    expect(text).toMatch(/^total \(derived families\)\s+20$/m);
    expect(text).not.toContain('upper bound');
    expect(text).toContain('total: adds group limit, EWMA, CUSUM and sampling check (only the fall side of the charts), the families it can derive; it excludes fixed limit');
    expect(text).toContain('wearshift advises');
    await expect(run(['--group', 'nope'])).rejects.toThrow(InputError);
    await expect(run(['--components', '2.5'])).rejects.toThrow(/whole number/);
  });
});
