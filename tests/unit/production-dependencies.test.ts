/**
 * What a production install (`npm ci --omit=dev`, as the Dockerfile runs it) brings: not the demo's SMTP server and
 * mail parser, and one copy of the mail library. Read from package-lock.json, where npm marks development-only
 * packages with `"dev": true` (npm documentation, package-lock.json format).
 */
import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';

interface LockEntry {
  readonly version?: string;
  readonly dev?: boolean;
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
