/**
 * The pieces the queue benchmarks share: a private redis-server, worker processes (`wearshift worker`, as an
 * operator runs it), a bare BullMQ worker process for comparison, a webhook receiver for the notifications, the
 * simulated lab feed, and a wait for "everything processed".
 */
import { spawn, spawnSync, type ChildProcess } from 'node:child_process';
import { randomBytes } from 'node:crypto';
import { readFileSync, writeFileSync } from 'node:fs';
import { createServer, type Server } from 'node:http';
import { dirname, join } from 'node:path';
import { fileURLToPath } from 'node:url';
import type { JobType, Queue } from 'bullmq';
import type { Redis } from 'ioredis';
import type { ResultEvent } from '../src/domain/event.ts';
import { seededRandom } from '../src/simulation/random.ts';
import { simulateWearSeries } from '../src/simulation/wearSeries.ts';

const ROOT = join(dirname(fileURLToPath(import.meta.url)), '..');
const CLI = join(ROOT, 'bin', 'wearshift.js');
const BARE_WORKER = join(dirname(fileURLToPath(import.meta.url)), 'bareWorker.ts');

export const PIPELINE_GROUP = 'bench-line-gearboxes';

/** Why the pipeline cannot be benchmarked here, or undefined when it can. */
export function pipelineMissing(): string | undefined {
  const which = spawnSync('redis-server', ['--version'], { encoding: 'utf8' });
  if (which.status !== 0) return 'redis-server is not installed (apt-get install redis-server)';
  const help = spawnSync(process.execPath, [CLI, 'worker', '--help'], { cwd: ROOT, encoding: 'utf8', timeout: 60_000 });
  if (help.status !== 0 || !/queue workers/i.test(help.stdout)) {
    return 'the `wearshift worker` command is not available (node bin/wearshift.js worker --help fails: register it in src/cli/main.ts)';
  }
  return undefined;
}

export function redisServerVersion(): string {
  return /v=(\S+)/.exec(spawnSync('redis-server', ['--version'], { encoding: 'utf8' }).stdout)?.[1] ?? 'unknown';
}

export interface ConfigOptions {
  readonly prefix: string;
  /** Where the notifications go (a webhook receiver of this run). */
  readonly webhookUrl: string;
  /** Findings on samples older than this many days page nobody. */
  readonly quietAfterDays: number;
  /** Key partitions (`redis.partitions`). Default 1. */
  readonly partitions?: number;
}

/** The worker configuration: iron and copper watched, an iron limit, one escalation tier with a webhook. */
export function writeConfig(dir: string, o: ConfigOptions): string {
  const file = join(dir, `wearshift-bench-${o.prefix.replace(/\W/g, '')}.yaml`);
  const secret = `whsec_${randomBytes(24).toString('base64')}`;
  writeFileSync(
    file,
    `redis:
  prefix: "${o.prefix}"
  partitions: ${o.partitions ?? 1}
detection:
  measurands: [Fe, Cu]
  runningInHours: 0
backfill:
  quietAfterDays: ${o.quietAfterDays}
groups:
  - name: ${PIPELINE_GROUP}
    sumpLitres: 200
    residualFraction: 0.1
    limits:
      Fe: { caution: 40, alarm: 60 }
escalation:
  policies:
    - name: bench-on-call
      tiers:
        - { afterMinutes: 0, webhooks: [bench-receiver] }
channels:
  webhooks:
    - name: bench-receiver
      url: ${o.webhookUrl}
      secrets: ["${secret}"]
`,
  );
  return file;
}

export interface ChildWorker {
  readonly pid: number;
  /** Why the process ended, or undefined while it runs. */
  exited(): string | undefined;
  /** Peak resident set size so far (VmHWM), kB; read while the process lives. */
  peakRssKb(): number;
  /** CPU time used so far (user + system), seconds; read while the process lives. */
  cpuSeconds(): number;
  /** SIGTERM, then wait for the exit (SIGKILL after 20 s). */
  stop(): Promise<void>;
}

function child(args: readonly string[], env: NodeJS.ProcessEnv, name: string): ChildWorker {
  const proc: ChildProcess = spawn(process.execPath, args, { cwd: ROOT, env: { ...process.env, ...env }, stdio: ['ignore', 'ignore', 'pipe'] });
  let stderr = '';
  proc.stderr!.on('data', (d: Buffer) => {
    stderr = (stderr + d.toString()).slice(-4000);
  });
  let ended: string | undefined;
  const exited = new Promise<void>((resolve) => proc.once('exit', () => resolve()));
  let stopping = false;
  proc.once('exit', (code, signal) => {
    ended = `${name} (pid ${proc.pid}) exited with ${code ?? signal}: ${stderr.trim().split('\n').slice(-5).join(' | ')}`;
    if (!stopping) process.stderr.write(`[bench] ${ended}\n`);
  });
  return {
    pid: proc.pid!,
    exited: () => ended,
    peakRssKb() {
      const status = readFileSync(`/proc/${proc.pid}/status`, 'utf8');
      return Number(/VmHWM:\s+(\d+)\s+kB/.exec(status)?.[1] ?? NaN);
    },
    cpuSeconds() {
      // /proc/<pid>/stat: fields 14 and 15 (utime, stime) in clock ticks, 100 per second on Linux.
      const fields = readFileSync(`/proc/${proc.pid}/stat`, 'utf8').replace(/^.*\) /, '').split(' ');
      return (Number(fields[11]) + Number(fields[12])) / 100;
    },
    async stop() {
      if (proc.exitCode !== null || proc.signalCode !== null) return;
      stopping = true;
      const timer = setTimeout(() => proc.kill('SIGKILL'), 20_000);
      proc.kill('SIGTERM');
      await exited;
      clearTimeout(timer);
    },
  };
}

/** `node bin/wearshift.js worker` with the given configuration file, logging warnings only (and profiled, see below). */
export function startWorkerProcess(redisUrl: string, configFile: string, args: readonly string[] = []): ChildWorker {
  // BENCH_WORKER_PROFILE_DIR: write each worker process's CPU profile there (node --cpu-prof) when it stops.
  const profile = process.env.BENCH_WORKER_PROFILE_DIR;
  const node = profile ? ['--cpu-prof', `--cpu-prof-dir=${profile}`] : [];
  return child([...node, CLI, 'worker', ...args], { REDIS_URL: redisUrl, WEARSHIFT_CONFIG: configFile, LOG_LEVEL: 'warn' }, 'wearshift worker');
}

/** The same, on a Redis Cluster named by its seed nodes (REDIS_CLUSTER_NODES). */
export function startClusterWorkerProcess(seeds: string, configFile: string): ChildWorker {
  return child([CLI, 'worker'], { REDIS_URL: '', REDIS_CLUSTER_NODES: seeds, WEARSHIFT_CONFIG: configFile, LOG_LEVEL: 'warn' }, 'wearshift worker (cluster)');
}

/** A BullMQ worker doing nothing with its jobs: the floor any BullMQ pipeline pays per job. */
export function startBareWorker(redisUrl: string, prefix: string, queue: string, concurrency: number): ChildWorker {
  return child(['--import', 'tsx', BARE_WORKER], { REDIS_URL: redisUrl, BENCH_PREFIX: prefix, BENCH_QUEUE: queue, BENCH_CONCURRENCY: String(concurrency) }, 'bare worker');
}

/** Waits until `count` worker connections listen on each queue; fails at once when one of the processes has ended. */
export async function workersListening(queues: readonly Queue[], count: number, processes: readonly ChildWorker[], timeoutMs = 60_000): Promise<void> {
  const deadline = Date.now() + timeoutMs;
  for (;;) {
    const ended = processes.map((p) => p.exited()).find((e) => e !== undefined);
    if (ended !== undefined) throw new Error(ended);
    const counts = await Promise.all(queues.map((q) => q.getWorkersCount()));
    if (counts.every((n) => n >= count)) return;
    if (Date.now() > deadline) throw new Error(`workers did not connect within ${timeoutMs} ms (${queues.map((q, i) => `${q.name}: ${counts[i]}`).join(', ')})`);
    await sleep(100);
  }
}

/**
 * Resolves with the time (performance.now()) of the first of two consecutive polls that found no job waiting, active,
 * prioritised or (when `delayedToo`) delayed on any of the queues. Fails at once when one of `processes` has ended:
 * nothing would drain the queues any more.
 */
export async function drainedAt(
  queues: readonly Queue[],
  processes: readonly ChildWorker[],
  options: { pollMs?: number; timeoutMs?: number; delayedToo?: boolean } = {},
): Promise<number> {
  const pollMs = options.pollMs ?? 25;
  const timeoutMs = options.timeoutMs ?? 600_000;
  const deadline = performance.now() + timeoutMs;
  const states: JobType[] = ['waiting', 'active', 'prioritized', 'waiting-children', ...(options.delayedToo === false ? [] : (['delayed'] as const))];
  let firstQuiet: number | undefined;
  for (;;) {
    const ended = processes.map((p) => p.exited()).find((e) => e !== undefined);
    if (ended !== undefined) throw new Error(ended);
    const at = performance.now();
    const counts = await Promise.all(queues.map((q) => q.getJobCounts(...states)));
    const busy = counts.some((c) => Object.values(c).some((n) => n > 0));
    if (busy) firstQuiet = undefined;
    else if (firstQuiet === undefined) firstQuiet = at;
    else return firstQuiet;
    if (performance.now() > deadline) throw new Error(`queues not drained within ${timeoutMs} ms: ${JSON.stringify(counts)}`);
    await sleep(pollMs);
  }
}

export interface Receiver {
  readonly url: string;
  /** Arrival times (epoch ms) of the webhook deliveries. */
  readonly received: number[];
  close(): Promise<void>;
}

/** A webhook endpoint that accepts every delivery. */
export async function startReceiver(): Promise<Receiver> {
  const received: number[] = [];
  const server: Server = createServer((req, res) => {
    req.resume();
    req.on('end', () => {
      received.push(Date.now());
      res.writeHead(204).end();
    });
  });
  await new Promise<void>((resolve) => server.listen(0, '127.0.0.1', resolve));
  const address = server.address();
  const port = typeof address === 'object' && address !== null ? address.port : 0;
  return {
    url: `http://127.0.0.1:${port}/hooks/wearshift`,
    received,
    close: () => new Promise<void>((resolve) => server.close(() => resolve())),
  };
}

export interface FeedOptions {
  readonly components: number;
  readonly samplesPerComponent: number;
  /** Share of the components whose iron wear rate triples half-way (they raise findings and incidents). */
  readonly faultyShare: number;
  /** The last sample of the feed is drawn this long before `now`. */
  readonly endsBeforeNowMs: number;
  readonly now: number;
  readonly seed: number;
  readonly unitPrefix: string;
}

/**
 * Result events of a fleet in the order a lab feed sends them (by sampling time across the fleet), with the noise
 * model of the analysis benchmarks: 250 h ± 40 % between samples, drains every 1000 h with residual oil, make-up
 * oil, lab noise 1 ppm + 5 %; every component has its own in-control rate.
 */
export function labFeed(o: FeedOptions): ResultEvent[] {
  const rng = seededRandom(o.seed);
  const intervalHours = 250;
  const spanMs = o.samplesPerComponent * intervalHours * 1.4 * 3_600_000;
  const events: ResultEvent[] = [];
  for (let c = 0; c < o.components; c++) {
    const unit = `${o.unitPrefix}${String(c + 1).padStart(5, '0')}`;
    const faulty = c < Math.round(o.faultyShare * o.components);
    const fe = 0.04 * (0.7 + 0.6 * rng.next());
    const series = simulateWearSeries(
      {
        unit,
        component: 'gearbox',
        group: PIPELINE_GROUP,
        samples: o.samplesPerComponent,
        metals: {
          Fe: { rate: fe, processVariance: 0.4 * fe, ...(faulty && { step: { atHours: (o.samplesPerComponent * intervalHours) / 2, factor: 3 } }) },
          Cu: { rate: 0.01, processVariance: 0.004 },
        },
        labNoise: { absolute: 1, relative: 0.05 },
        intervalHours,
        jitter: 0.4,
        drainHours: 1000,
        residualFraction: 0.1,
        sumpLitres: 200,
        topUpPer100h: 1,
        // Components start at different times, so that the feed interleaves them.
        startTime: o.now - o.endsBeforeNowMs - spanMs + rng.next() * intervalHours * 3_600_000,
        decimals: 1,
        sampleIdPrefix: `LAB-${unit}`,
      },
      seededRandom(o.seed * 7919 + c),
    );
    events.push(...series.map((s) => s.event));
  }
  return events.sort((a, b) => Date.parse(a.sampledAt) - Date.parse(b.sampledAt) || (a.sampleId < b.sampleId ? -1 : 1));
}

/** Calls and server-side microseconds of the scripts and commands Redis ran since the last CONFIG RESETSTAT. */
export async function redisWork(client: Redis): Promise<{ calls: number; usec: number; scriptCalls: number }> {
  const stats = await client.info('commandstats');
  let calls = 0;
  let usec = 0;
  let scriptCalls = 0;
  for (const m of stats.matchAll(/^cmdstat_(\S+?):calls=(\d+),usec=(\d+)/gm)) {
    calls += Number(m[2]);
    usec += Number(m[3]);
    if (m[1] === 'evalsha' || m[1] === 'eval' || m[1] === 'fcall') scriptCalls += Number(m[2]);
  }
  return { calls, usec, scriptCalls };
}

export function sleep(ms: number): Promise<void> {
  return new Promise((resolve) => setTimeout(resolve, ms));
}
