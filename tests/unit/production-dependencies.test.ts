/**
 * What a production install (`npm ci --omit=dev`, as the Dockerfile runs it) brings: not the demo's SMTP server and
 * mail parser, no TypeScript compiler (the image runs the compiled dist/), and one copy of the mail library — one in
 * the whole install too, development dependencies included. Read from package-lock.json, where npm marks
 * development-only packages with `"dev": true` and lists every installed copy by its path (npm documentation,
 * package-lock.json format).
 */
import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';

interface LockEntry {
  readonly version?: string;
  readonly dev?: boolean;
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
