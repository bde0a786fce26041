/**
 * The command line loads only the command that runs: `wearshift --help` lists every command from the index
 * (src/cli/commandIndex.ts) without loading any of them, and that list must read exactly as it does with every
 * command loaded in full. bin/wearshift.js runs the compiled build only while it was built from the sources as
 * they are (bin/sourceSignature.mjs).
 */
import { execFile } from 'node:child_process';
import { mkdtempSync, readFileSync, rmSync, utimesSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { COMMANDS } from '../../src/cli/commandIndex.ts';
import { buildProgram } from '../../src/cli/main.ts';
import { BIN } from '../helpers/cli.ts';
// @ts-expect-error a plain JavaScript module of the launcher, without type declarations
import { sourceSignature } from '../../bin/sourceSignature.mjs';

describe('the command index', () => {
  it('lists every command as it reads when the command is loaded in full (name, usage, summary, group)', async () => {
    const listed = await buildProgram();
    const loaded = await buildProgram(() => true);
    expect(listed.helpInformation()).toBe(loaded.helpInformation());
    expect(loaded.commands.map((c) => c.name())).toEqual(COMMANDS.map((c) => c.name));
    for (const c of loaded.commands) expect(c.description(), c.name()).toBe(COMMANDS.find((e) => e.name === c.name())!.summary);
  }, 120_000);

  it('loads the one command asked for, with its options', async () => {
    const program = await buildProgram((e) => e.name === 'design');
    const design = program.commands.find((c) => c.name() === 'design')!;
    expect(design.commands.map((c) => c.name())).toEqual(expect.arrayContaining(['ewma', 'cusum', 'noise']));
    expect(program.commands.find((c) => c.name() === 'import')!.options).toEqual([]);
  }, 60_000);
});

describe('the command line from any directory', () => {
  const elsewhere = mkdtempSync(join(tmpdir(), 'wearshift-elsewhere-'));
  afterAll(() => rmSync(elsewhere, { recursive: true, force: true }));
  /** `wearshift …` started outside the checkout, as after `npm link`; bounded only against a hung command. */
  const run = (args: string[]) =>
    new Promise<string>((resolve, reject) =>
      execFile(process.execPath, [BIN, ...args], { cwd: elsewhere, timeout: 600_000 }, (error, stdout, stderr) => (error ? reject(new Error(`${error.message}\n${stderr}`)) : resolve(stdout))),
    );

  it('prints the version in package.json with --version', async () => {
    const { version } = JSON.parse(readFileSync(new URL('../../package.json', import.meta.url), 'utf8')) as { version: string };
    expect((await run(['--version'])).trim()).toBe(version);
  }, 600_000);

  it('lists the operator commands first and the developer commands (schema, docs) last in --help', async () => {
    const help = await run(['--help']);
    const at = (name: string) => help.search(new RegExp(`^ {2}${name}\\b`, 'm'));
    const operator = ['demo', 'serve', 'worker', 'api', 'import', 'incidents', 'replay', 'design', 'backtest'].map(at);
    const developer = ['schema', 'docs'].map(at);
    for (const i of [...operator, ...developer]) expect(i).toBeGreaterThan(0);
    expect(Math.min(...developer)).toBeGreaterThan(Math.max(...operator));
    expect(help.indexOf('For developers of wearshift:')).toBeGreaterThan(Math.max(...operator));
    expect(help).toMatch(/^ {2}-V, --version/m);
  }, 600_000);
});

describe('the build signature', () => {
  const dir = mkdtempSync(join(tmpdir(), 'wearshift-signature-'));
  afterAll(() => rmSync(dir, { recursive: true, force: true }));

  it('changes when a source file is edited, added or removed', () => {
    writeFileSync(join(dir, 'a.ts'), 'export const a = 1;\n');
    utimesSync(join(dir, 'a.ts'), 1_000, 1_000);
    const before = sourceSignature(dir) as string;
    expect(sourceSignature(dir)).toBe(before);
    writeFileSync(join(dir, 'a.ts'), 'export const a = 2;\n');
    utimesSync(join(dir, 'a.ts'), 2_000, 2_000);
    const edited = sourceSignature(dir) as string;
    expect(edited).not.toBe(before);
    writeFileSync(join(dir, 'b.ts'), '');
    utimesSync(join(dir, 'b.ts'), 1_000, 1_000);
    expect(sourceSignature(dir)).not.toBe(edited);
    rmSync(join(dir, 'b.ts'));
    expect(sourceSignature(dir)).toBe(edited);
  });
});
