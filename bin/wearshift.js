#!/usr/bin/env node
// Runs the compiled build in dist/ (made by `npm ci` through the prepare script, or `npm run build`) while it matches
// the sources; otherwise — sources edited since — it runs the TypeScript sources through tsx (a development
// dependency), so a fresh clone needs no separate build step and a stale build is never run. A production install
// (--omit=dev, as in the Dockerfile) has no TypeScript compiler and runs the build only.
import { readFileSync } from 'node:fs';
import { fileURLToPath } from 'node:url';
import { sourceSignature } from './sourceSignature.mjs';

const root = fileURLToPath(new URL('../', import.meta.url));
function builtFromTheseSources() {
  try {
    return readFileSync(`${root}dist/.source-signature`, 'utf8') === sourceSignature(`${root}src`);
  } catch {
    return false;
  }
}

// A reader that stops early (`wearshift chart ... | head`) is not an error.
process.stdout.on('error', (e) => {
  if (e.code === 'EPIPE') process.exit(0);
  throw e;
});
let main;
if (builtFromTheseSources()) ({ main } = await import('../dist/cli/main.js'));
else {
  let register;
  try {
    ({ register } = await import('tsx/esm/api'));
  } catch {
    process.stderr.write('wearshift: dist/ is missing or older than src/, and tsx (a development dependency) is not installed: run `npm run build` where the development dependencies are installed\n');
    process.exit(1);
  }
  register();
  ({ main } = await import('../src/cli/main.ts'));
}
process.exitCode = await main(process.argv.slice(2));
