/**
 * The real command line with budgets no chart limit can meet: a configuration file that asks for one is refused by
 * every command that loads it (design, worker) with one line naming detection.budget and exit code 2, and a
 * --budget option likewise names the option; exit code 1 stays for rejected records. And `design noise` sends each
 * part of the load to the escalation policy that matches it.
 */
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { runCli } from '../helpers/cli.ts';

let dir: string;
const file = (name: string) => join(dir, name);

beforeAll(() => {
  dir = mkdtempSync(join(tmpdir(), 'wearshift-design-budget-'));
  writeFileSync(file('loose.yaml'), 'detection:\n  budget: { alarms: 1000, years: 1 }\n');
  writeFileSync(
    file('split.yaml'),
    [
      'channels:',
      '  email: { from: "wearshift <alerts@plant.example>", smtp: { host: localhost } }',
      'escalation:',
      '  policies:',
      '    - { name: early, match: { severities: [watch] }, tiers: [{ afterMinutes: 0, email: [watch@plant.example] }] }',
      '    - { name: levels, match: { severities: [caution, alarm] }, tiers: [{ afterMinutes: 0, email: [desk@plant.example] }] }',
      '    - { name: samples, match: { kinds: [sampling] }, tiers: [{ afterMinutes: 0, email: [lab@plant.example] }] }',
      '',
    ].join('\n'),
  );
});

afterAll(() => rmSync(dir, { recursive: true, force: true }));

/** No stack trace: the message alone, on one line after the file's. */
function expectUsageError(r: { code: number | null; stdout: string; stderr: string }, ...parts: string[]): void {
  expect(r.code, r.stderr).toBe(2);
  for (const p of parts) expect(r.stderr).toContain(p);
  expect(r.stderr).not.toMatch(/\n\s+at /);
  expect(r.stderr).not.toContain('RangeError');
}

describe('a false-alarm budget no chart limit can meet', () => {
  it('in the configuration: design noise and the worker refuse the file, naming detection.budget and the range', async () => {
    const noise = await runCli(['design', 'noise', '--config', file('loose.yaml')], { WEARSHIFT_CONFIG: undefined });
    expectUsageError(noise, `${file('loose.yaml')}: invalid configuration`, 'detection.budget: a budget of 1000 false alarm(s) per component per 1 year(s)', 'chart limits can be derived for 20 to 100000000 samples');
    // The worker reads the configuration before it connects: it refuses to start rather than fail on its first design.
    const worker = await runCli(['worker', '--config', file('loose.yaml')], { REDIS_URL: 'redis://127.0.0.1:1', LOG_LEVEL: 'warn' });
    expectUsageError(worker, 'detection.budget: a budget of 1000 false alarm(s)');
  });

  it('as --budget: a usage error naming the option, below and above the range', async () => {
    const low = await runCli(['design', 'cusum', '--budget', '1000 per component per year'], { WEARSHIFT_CONFIG: undefined });
    expectUsageError(low, 'wearshift: --budget "1000 per component per year" gives each chart an in-control run length of 0.6813 samples');
    const high = await runCli(['design', 'ewma', '--budget', '1 per component per 200000 years'], { WEARSHIFT_CONFIG: undefined });
    expectUsageError(high, 'wearshift: --budget "1 per component per 200000 years" gives each chart an in-control run length of 136300000 samples');
  });
});

describe('an EWMA smoothing constant outside the published design tables', () => {
  it('design ewma --lambda below 0.01 is a usage error naming the option and the range', async () => {
    const r = await runCli(['design', 'ewma', '--lambda', '0.001', '--arl0', '370'], { WEARSHIFT_CONFIG: undefined });
    expectUsageError(r, 'wearshift: --lambda must be from 0.01 to 1 (the range of the published EWMA design tables), got 0.001');
  });
});

describe('wearshift design noise --components', () => {
  it('counts for each tier-0 target only the parts its policy matches', async () => {
    const r = await runCli(['design', 'noise', '--config', file('split.yaml'), '--components', '45'], { WEARSHIFT_CONFIG: undefined });
    expect(r.code, r.stderr).toBe(0);
    // 45 components / 365.25 days × (14.4 rises, 4 peers, 1.6 falls) per 100 component-years.
    expect(r.stdout).toContain('  email:watch@plant.example hears of 0.01774 a day, 0.1242 a week: EWMA (watch), CUSUM (watch)\n');
    expect(r.stdout).toContain('  email:desk@plant.example hears of 0.004928 a day, 0.0345 a week: group limit (caution)\n');
    expect(r.stdout).toContain('  email:lab@plant.example hears of 0.001971 a day, 0.0138 a week: sampling check (watch, sampling incidents)\n');
    expect(r.stdout).not.toContain('hears of all');
    expect(r.stdout).toMatch(/^total \(derived families\)\s+20$/m);
  });
});
