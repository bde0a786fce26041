/**
 * How fast the command line answers: `wearshift --help`, `wearshift design --help` and one `wearshift design ewma`
 * computation, each started as a user starts it (`node bin/wearshift.js …`, a new process per run), against a bare
 * `node -e 0` measured in the same run. The target is under 0.5 s for each; the ratio to the bare Node start says
 * how much of the time is wearshift's own. Whether the compiled build in dist/ was used (it is while it matches the
 * sources: bin/sourceSignature.mjs) is printed beside the figures: after an edit the command runs through tsx until
 * `npm run build`.
 */
import { spawnSync } from 'node:child_process';
import { readFileSync } from 'node:fs';
import type { PartResult } from './report.ts';
import type { RunOptions } from './runner.ts';
import { fmt, median } from './stats.ts';
// @ts-expect-error a plain JavaScript module of the launcher, without type declarations
import { sourceSignature } from '../bin/sourceSignature.mjs';

const ROOT = new URL('../', import.meta.url);
const TARGET_MS = 500;

const CASES: readonly { label: string; args: readonly string[] }[] = [
  { label: 'wearshift --help', args: ['bin/wearshift.js', '--help'] },
  { label: 'wearshift design --help', args: ['bin/wearshift.js', 'design', '--help'] },
  { label: 'wearshift design ewma --lambda 0.2 --L 2.8', args: ['bin/wearshift.js', 'design', 'ewma', '--lambda', '0.2', '--L', '2.8'] },
];

function timeRun(args: readonly string[]): number {
  const t = process.hrtime.bigint();
  const run = spawnSync(process.execPath, args, { cwd: ROOT, encoding: 'utf8', timeout: 60_000 });
  if (run.status !== 0) throw new Error(`node ${args.join(' ')} exited ${run.status}: ${run.stderr}`);
  return Number(process.hrtime.bigint() - t) / 1e6;
}

function compiledBuildInUse(): boolean {
  try {
    return readFileSync(new URL('dist/.source-signature', ROOT), 'utf8') === sourceSignature(new URL('src', ROOT).pathname);
  } catch {
    return false;
  }
}

export function runStartup({ scale }: RunOptions): PartResult {
  const runs = Math.max(3, Math.round(9 * scale));
  const bare: number[] = [];
  const times = CASES.map(() => [] as number[]);
  // Interleaved, so that a change in the machine's load hits every case alike.
  for (let i = 0; i < runs; i++) {
    bare.push(timeRun(['-e', '0']));
    CASES.forEach((c, k) => times[k]!.push(timeRun(c.args)));
  }
  const bareMs = median(bare);
  const rows = CASES.map((c, k) => {
    const ms = median(times[k]!);
    return { label: c.label, ms, ratio: ms / bareMs, met: ms < TARGET_MS };
  });
  const compiled = compiledBuildInUse();
  return {
    name: 'startup',
    json: { runs, bareNodeMs: bareMs, compiledBuild: compiled, targetMs: TARGET_MS, cases: rows },
    table: {
      columns: ['command', 'median ms', '× bare node', `< ${TARGET_MS} ms`],
      rows: [['node -e 0 (bare)', fmt(bareMs, 0), '1.0', ''], ...rows.map((r) => [r.label, fmt(r.ms, 0), fmt(r.ratio, 1), r.met ? 'met' : 'MISSED'])],
    },
    notes: [
      `${runs} runs per command, interleaved; a new process per run. Compiled build (dist/) in use: ${compiled ? 'yes' : 'no — the sources ran through tsx (run `npm run build`)'}.`,
    ],
  };
}
