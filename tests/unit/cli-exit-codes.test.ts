/**
 * The command line's exit codes as a script sees them: 0 for --help and --version, 2 for a usage error (commander's
 * own: an unknown option, a missing required option or argument) as for any other error the user can fix, so that 1
 * keeps meaning "some records were rejected".
 */
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { runCli } from '../helpers/cli.ts';

const dir = mkdtempSync(join(tmpdir(), 'wearshift-exit-codes-'));
afterAll(() => rmSync(dir, { recursive: true, force: true }));

// Each case starts the real command line (a Node process, through tsx after an edit): generous bounds, no timing.
describe('exit codes', { timeout: 600_000 }, () => {
  it('an unknown option of a command exits 2 with commander\'s message, not 1', async () => {
    const file = join(dir, 'x.csv');
    writeFileSync(file, 'sampleId,unit,component,sampledAt,Fe\n');
    const r = await runCli(['import', '--dry-rn', file]);
    expect(r.stderr).toMatch(/unknown option '--dry-rn'/);
    expect(r.stderr).toMatch(/Did you mean --dry-run\?/);
    expect(r.code).toBe(2);
  });

  it('a missing required option and an unknown option of the program exit 2', async () => {
    const missing = await runCli(['incidents', 'shelve', 'PS1/gearbox@S-1', '--by', 'me', '--reason', 'test']);
    expect(missing.stderr).toMatch(/required option '--until <iso>' not specified/);
    expect(missing.code).toBe(2);
    const unknown = await runCli(['--h', 'abc']);
    expect(unknown.stderr).toMatch(/unknown option '--h'/);
    expect(unknown.code).toBe(2);
  });

  it('a missing argument and no command at all exit 2', async () => {
    const noFile = await runCli(['replay']);
    expect(noFile.stderr).toMatch(/missing required argument 'file'/);
    expect(noFile.code).toBe(2);
    const nothing = await runCli([]);
    expect(nothing.stderr).toMatch(/Usage: wearshift/);
    expect(nothing.code).toBe(2);
  });

  it('--help and --version exit 0, and --help states the exit codes', async () => {
    const help = await runCli(['--help']);
    expect(help.code).toBe(0);
    expect(help.stdout).toMatch(/Exit codes: 0 done; 1 some records were rejected/);
    expect(help.stdout).toMatch(/2 a usage or input error/);
    expect((await runCli(['import', '--help'])).code).toBe(0);
    const version = await runCli(['--version']);
    expect(version.code).toBe(0);
    expect(version.stdout.trim()).toMatch(/^\d+\.\d+\.\d+/);
  });
});

describe('input errors the user can fix: one line, exit 2', { timeout: 600_000 }, () => {
  it('--now without a time zone is refused by replay and backtest, not read in the machine\'s zone', async () => {
    const file = join(dir, 'one.jsonl');
    writeFileSync(file, `${JSON.stringify({ sampleId: 'N-1', unit: 'U', component: 'gearbox', sampledAt: '2026-01-05T08:00:00Z', readings: { Fe: 3 } })}\n`);
    for (const command of [['replay', file], ['backtest', file, '--json']]) {
      const r = await runCli([...command, '--now', '2026-02-01T12:00']);
      expect(r.stderr).toBe('wearshift: --now: expected an ISO 8601 date-time with a time zone, such as 2026-03-01T18:00:00Z; got "2026-02-01T12:00"\n');
      expect(r.code).toBe(2);
    }
    // With its zone it is taken.
    expect((await runCli(['replay', file, '--now', '2026-02-01T12:00+01:00', '--json'])).code).toBe(0);
  });

  it('docs with a README that is missing or lacks the reference markers', async () => {
    const missing = join(dir, 'missing.md');
    const r = await runCli(['docs', '--readme', missing, '--schemas', join(dir, 'schemas')]);
    expect(r.stderr).toBe(`wearshift: ${missing}: cannot read it: ENOENT: no such file or directory, open '${missing}'\n`);
    expect(r.code).toBe(2);
    const plain = join(dir, 'plain.md');
    writeFileSync(plain, '# a README without the generated sections\n');
    const unmarked = await runCli(['docs', '--readme', plain, '--schemas', join(dir, 'schemas')]);
    expect(unmarked.stderr).toMatch(new RegExp(`^wearshift: ${plain.replace(/[.*+?^${}()|[\]\\]/g, '\\$&')}: README has no markers .*\n$`));
    expect(unmarked.code).toBe(2);
  });
});
