/**
 * What a production install (`npm ci --omit=dev`, as the Dockerfile runs it) brings: not the demo's SMTP server and
 * mail parser, and one copy of the mail library. Read from package-lock.json, where npm marks development-only
 * packages with `"dev": true` (npm documentation, package-lock.json format).
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
const production = Object.entries(lock.packages).filter(([path, entry]) => path !== '' && entry.dev !== true);
const named = (name: string) => production.filter(([path]) => path === `node_modules/${name}` || path.endsWith(`/node_modules/${name}`));

describe('production dependencies', () => {
  it('leave out the demo mail server and parser', () => {
    expect(named('smtp-server')).toEqual([]);
    expect(named('mailparser')).toEqual([]);
  });

  it('hold one copy of the mail library', () => {
    expect(named('nodemailer').map(([path, e]) => `${path}@${e.version}`)).toHaveLength(1);
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
