/**
 * The benchmark runner behind `npm run bench` (entry: main.ts): the benchmarks of the analysis core and of the queue pipeline. A table per part on screen; with
 * --json one JSON line per part on stdout (the tables then go to stderr). Not part of `npm test`.
 *
 *   npm run bench                       every part at the documented sizes (about 10 minutes on 2 cores, and about 6 more for the three fleets of quiet)
 *   npm run bench -- --only detection   one part (repeat --only for several)
 *   npm run bench -- --scale 0.1        every size shrunk tenfold, for a quick run
 *   npm run bench -- --json             JSON lines
 */
import { cpus, loadavg, totalmem } from 'node:os';
import { parseArgs } from 'node:util';
import { runCluster } from './cluster.ts';
import { runDesignCheck } from './designCheck.ts';
import { runDetection } from './detection.ts';
import { runForecast } from './forecast.ts';
import { runEvaluationCost } from './evaluationCost.ts';
import { jsonLine, renderPart, type PartResult } from './report.ts';
import { runQuiet } from './quiet.ts';
import { runScaling } from './scaling.ts';
import { runStartup } from './startup.ts';
import { runLongChart } from './longChart.ts';
import { redisServerVersion } from './pipeline.ts';
import { runBackfill, runGroupBacklog, runLatency, runThroughput } from './pipelineParts.ts';

export interface RunOptions {
  /** Multiplies every size (components, results, durations). */
  readonly scale: number;
  readonly seed: number;
  /** Progress lines, on stderr. */
  readonly log: (line: string) => void;
}

type Part = (o: RunOptions) => PartResult | Promise<PartResult>;

const at = (scale: number, n: number, least = 1) => Math.max(least, Math.round(n * scale));

export const PARTS: Record<string, Part> = {
  detection: ({ scale, seed }) =>
    runDetection({
      seed,
      trainingComponents: at(scale, 300, 30),
      tuningComponents: at(scale, 1500, 50),
      testComponents: at(scale, 1500, 50),
      steppedComponents: at(scale, 800, 50),
    }),
  'design-check': ({ scale, seed }) => runDesignCheck({ seed, components: at(scale, 300, 40) }),
  quiet: ({ scale, seed, log }) => runQuiet({ seed, log, componentsPerKind: at(scale, 150, 15), fleets: QUIET_FLEETS }),
  forecast: ({ scale, seed }) => runForecast({ seed, components: at(scale, 300, 30), trainingComponents: at(scale, 40, 10) }),
  scaling: ({ scale, seed }) => runScaling({ seed, histories: at(scale, 5, 2), batches: at(scale, 15, 3) }),
  throughput: (o) => runThroughput(o),
  latency: (o) => runLatency(o),
  backfill: (o) => runBackfill(o),
  'group-backlog': (o) => runGroupBacklog(o),
  'evaluation-cost': (o) => runEvaluationCost(o),
  cluster: (o) => runCluster(o),
  startup: (o) => runStartup(o),
  'long-chart': (o) => runLongChart(o),
};

/** Fleets the quiet part pools (seeds --seed, --seed + 1, …): one fleet's 30-odd changes of a kind leave its shares too uncertain to judge a target on. */
const QUIET_FLEETS = 3;

const USAGE = `usage: npm run bench -- [--only NAME]... [--scale S] [--seed N] [--json]
parts: ${Object.keys(PARTS).join(', ')}`;

export async function main(argv: string[]): Promise<number> {
  let args;
  try {
    args = parseArgs({
      args: argv,
      options: {
        only: { type: 'string', multiple: true },
        scale: { type: 'string', default: '1' },
        seed: { type: 'string', default: '1' },
        json: { type: 'boolean', default: false },
        help: { type: 'boolean', default: false },
      },
    }).values;
  } catch (e) {
    process.stderr.write(`bench: ${(e as Error).message}\n${USAGE}\n`);
    return 2;
  }
  if (args.help) {
    process.stdout.write(`${USAGE}\n`);
    return 0;
  }
  const scale = Number(args.scale);
  const seed = Number(args.seed);
  if (!(scale > 0)) return usageError(`--scale must be a number above 0, got "${args.scale}"`);
  if (!Number.isInteger(seed)) return usageError(`--seed must be a whole number, got "${args.seed}"`);
  const names = args.only ?? Object.keys(PARTS);
  const unknown = names.filter((n) => !(n in PARTS));
  if (unknown.length > 0) return usageError(`unknown part ${unknown.map((n) => `"${n}"`).join(', ')}`);

  const screen = args.json ? process.stderr : process.stdout;
  const log = (line: string) => process.stderr.write(`[bench] ${line}\n`);
  let failed = false;
  const started = performance.now();
  const machine = machineLine();
  log(`machine: ${machine.cores} cores, ${machine.memoryGb} GB, load average ${machine.loadAverage.join(' ')}, node ${machine.node}, redis-server ${machine.redisServer}`);
  if (args.json) process.stdout.write(`${JSON.stringify({ bench: 'machine', ...machine, scale, seed })}\n`);
  for (const name of names) {
    log(`${name}: running${scale === 1 ? '' : ` at scale ${scale}`}`);
    const t0 = performance.now();
    let result: PartResult;
    try {
      result = await PARTS[name]!({ scale, seed, log });
    } catch (e) {
      failed = true;
      const message = e instanceof Error ? e.message : String(e);
      log(`${name}: failed: ${e instanceof Error ? (e.stack ?? message) : message}`);
      result = { name, json: { error: message }, table: { columns: ['part', 'result'], rows: [[name, `failed: ${message}`]] }, notes: [] };
    }
    log(`${name}: ${((performance.now() - t0) / 1000).toFixed(1)} s`);
    screen.write(`${renderPart(result)}\n`);
    if (args.json) process.stdout.write(`${jsonLine(result)}\n`);
  }
  log(`total ${((performance.now() - started) / 1000).toFixed(1)} s`);
  return failed ? 1 : 0;
}

/** The machine the figures belong to; the load average tells whether others were using it at the same time. */
function machineLine() {
  return {
    cores: cpus().length,
    memoryGb: Math.round(totalmem() / 2 ** 30),
    loadAverage: loadavg().map((x) => Number(x.toFixed(2))),
    node: process.version,
    redisServer: redisServerVersion(),
  };
}

function usageError(message: string): number {
  process.stderr.write(`bench: ${message}\n${USAGE}\n`);
  return 2;
}
