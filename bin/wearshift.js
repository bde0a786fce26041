#!/usr/bin/env node
// The command runs the TypeScript sources through tsx so that a fresh `npm ci` needs no build step.
import { register } from 'tsx/esm/api';

register();
// A reader that stops early (`wearshift chart ... | head`) is not an error.
process.stdout.on('error', (e) => {
  if (e.code === 'EPIPE') process.exit(0);
  throw e;
});
const { main } = await import('../src/cli/main.ts');
process.exitCode = await main(process.argv.slice(2));
