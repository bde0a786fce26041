#!/usr/bin/env node
// `npm run build`, and the prepare script that `npm ci` / `npm install` run: compiles src/ to plain JavaScript in
// dist/ (no type check here: `npm run typecheck` does that) so that `wearshift` starts without compiling TypeScript.
// Without TypeScript (a production install with --omit=dev) it builds nothing: such an install runs a dist/ built
// beforehand (the Dockerfile builds in a stage with the development dependencies).
import { spawnSync } from 'node:child_process';
import { cpSync, rmSync, writeFileSync } from 'node:fs';
import { createRequire } from 'node:module';
import { fileURLToPath } from 'node:url';
import { sourceSignature } from './sourceSignature.mjs';

const root = fileURLToPath(new URL('../', import.meta.url));
const src = `${root}src`;
const dist = `${root}dist`;
let tsc;
try {
  tsc = createRequire(import.meta.url).resolve('typescript/bin/tsc');
} catch {
  process.stderr.write('wearshift build: TypeScript is not installed, so nothing is compiled; the command needs a dist/ built where the development dependencies are installed\n');
  process.exit(0);
}
const signature = sourceSignature(src);
rmSync(dist, { recursive: true, force: true });
const run = spawnSync(process.execPath, [tsc, '-p', 'tsconfig.build.json'], { cwd: root, stdio: 'inherit' });
if (run.status !== 0) process.exit(run.status ?? 1);
// What the compiler does not carry over: the board's static files, and the chart and evaluation threads' entries
// (which under tsx register the TypeScript loader first; compiled, they load the compiled thread directly).
cpSync(`${src}/board`, `${dist}/board`, { recursive: true });
writeFileSync(`${dist}/render/chartThread.mjs`, "// Entry of a chart thread in the compiled build (see src/render/chartThread.mjs).\nawait import('./chartThread.js');\n");
writeFileSync(`${dist}/queue/evaluationThread.mjs`, "// Entry of an evaluation thread in the compiled build (see src/queue/evaluationThread.mjs).\nawait import('./evaluationThread.js');\n");
writeFileSync(`${dist}/.source-signature`, signature);
