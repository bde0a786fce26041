/**
 * What a production install (`npm ci --omit=dev`, as the Dockerfile runs it) brings: not the demo's SMTP server and
 * mail parser, no TypeScript compiler (the image runs the compiled dist/), and one copy of the mail library — one in
 * the whole install too, development dependencies included. Read from package-lock.json, where npm marks
 * development-only packages with `"dev": true` and lists every installed copy by its path (npm documentation,
 * package-lock.json format).
 */
import { readFileSync } from 'node:fs';
import { createRequire } from 'node:module';
import { describe, expect, it } from 'vitest';

interface LockEntry {
  readonly version?: string;
  readonly dev?: boolean;
  readonly engines?: { readonly node?: string };
}

const lock = JSON.parse(readFileSync(new URL('../../package-lock.json', import.meta.url), 'utf8')) as { packages: Record<string, LockEntry> };
const installed = Object.entries(lock.packages).filter(([path]) => path !== '');
const production = installed.filter(([, entry]) => entry.dev !== true);
const copies = (entries: typeof installed, name: string) => entries.filter(([path]) => path === `node_modules/${name}` || path.endsWith(`/node_modules/${name}`));
const named = (name: string) => copies(production, name);

describe('production dependencies', () => {
  it('leave out the demo mail server and parser', () => {
    expect(named('smtp-server')).toEqual([]);
    expect(named('mailparser')).toEqual([]);
  });

  it('leave out the TypeScript compilers', () => {
    for (const compiler of ['typescript', 'tsx', 'esbuild']) expect(named(compiler), compiler).toEqual([]);
  });

  it('hold one copy of the mail library, and so does the whole install', () => {
    expect(named('nodemailer').map(([path, e]) => `${path}@${e.version}`)).toHaveLength(1);
    expect(copies(installed, 'nodemailer').map(([path, e]) => `${path}@${e.version}`)).toEqual([`node_modules/nodemailer@${lock.packages['node_modules/nodemailer']!.version}`]);
  });
});

/** npm's own version-range library (semver, a development dependency), the rules `npm ci` checks `engines` with. */
const semver = createRequire(import.meta.url)('semver') as { satisfies(version: string, range: string): boolean; minVersion(range: string): { version: string } | null };

describe('the Node.js version', () => {
  const declared = (JSON.parse(readFileSync(new URL('../../package.json', import.meta.url), 'utf8')) as { engines: { node: string } }).engines.node;
  const lowest = semver.minVersion(declared)!.version;

  it('declared in package.json is supported by every package in the lockfile, so that npm ci warns of no engine', () => {
    const unsupported = Object.entries(lock.packages)
      .filter(([path, entry]) => path !== '' && entry.engines?.node !== undefined && !semver.satisfies(lowest, entry.engines.node))
      .map(([path, entry]) => `${path}@${entry.version} needs Node ${entry.engines!.node}`);
    expect(unsupported, `package.json declares Node ${declared}`).toEqual([]);
  });

  it('is the lowest release of the 20 line the tools run on, and the lockfile records the same', () => {
    expect(lowest).toBe('20.19.0');
    expect(lock.packages['']?.engines?.node).toBe(declared);
    expect(semver.satisfies(process.versions.node, declared)).toBe(true);
  });
});
