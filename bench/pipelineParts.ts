/**
 * The queue benchmarks, each on a private redis-server of its own (started here, flushed between phases, removed at
 * the end) with worker processes started as an operator starts them: `node bin/wearshift.js worker` with REDIS_URL
 * and a configuration file. Results enter through the result producer (src/queue/producer.ts), the integrators' way
 * in: validated, then enqueued on the `results` queue.
 *
 * - throughput: results per second from the first enqueue until every result is stored, its component evaluated and
 *   the findings fed to the incident store (results and evaluate queues drained, every component's last sample
 *   fed), beside a bare BullMQ worker that does nothing with the same events, for one and two worker processes;
 * - latency: at a steady 200 results/s onto components with history, from enqueue to the completion of the result's
 *   job (stored, and evaluated when the component was free) and to the incident's notification job on the `notify` queue;
 * - backfill: 100 000 old results (quiet: nobody is paged) over 1 000 components, sent as history jobs (stored and
 *   evaluated month by month), once on the worker's own thread and once with history threads: wall time, the worker's
 *   peak resident memory, Redis memory per component.
 * - group-backlog: two worker processes take a backlog of one group's old months, then current results; how long the
 *   current results wait to be judged when they are of the backlog's group (they must wait for its earlier months) and
 *   when they are of another group (arrival order waits only for a result's own group).
 */
import { Queue, QueueEvents, type Job } from 'bullmq';
import type { Redis } from 'ioredis';
import type { ResultEvent } from '../src/domain/event.ts';
import type { NotifyEffect } from '../src/incidents/model.ts';
import { createResultProducer, type ResultProducer } from '../src/queue/producer.ts';
import { DEFAULT_HISTORY_JOB_SIZE, defaultJobOptions, openPartitionedQueues, openSharedQueue, QUEUE_NAMES, resolveQueueSettings } from '../src/queue/queues.ts';
import { incidentOfRecord } from '../src/redis/incidentRecordValue.ts';
import { Partitions } from '../src/redis/keys.ts';
import { validateBatch } from '../src/intake/validate.ts';
import { WORKER_DEFAULTS } from '../src/queue/workers.ts';
import { RedisStore } from '../src/redis/redisStore.ts';
import { startEmbeddedRedis as startRedisServer, type EmbeddedRedis as RedisServer } from '../src/runtime/embeddedRedis.ts';
import {
  drainedAt,
  labFeed,
  PIPELINE_GROUP,
  redisWork,
  pipelineMissing,
  sleep,
  startBareWorker,
  startReceiver,
  startWorkerProcess,
  workersListening,
  writeConfig,
  type ChildWorker,
  type Receiver,
} from './pipeline.ts';
import { skipped, type PartResult } from './report.ts';
import type { RunOptions } from './runner.ts';
import { fmt, percentile, round } from './stats.ts';

const PREFIX = '{bench}';
/** Results per history job in the backfill part (the import's default). */
const HISTORY_JOB_SIZE = DEFAULT_HISTORY_JOB_SIZE;
const DAY_MS = 86_400_000;
/** Far enough back that no sample is backfill: every finding may page someone. */
const NEVER_QUIET_DAYS = 100_000;

const size = (scale: number, n: number, least: number) => Math.max(least, Math.round(n * scale));

interface Line {
  readonly server: RedisServer;
  readonly receiver: Receiver;
}

async function withLine<T>(fn: (line: Line) => Promise<T>): Promise<T> {
  const server = await startRedisServer();
  const receiver = await startReceiver();
  try {
    return await fn({ server, receiver });
  } finally {
    await receiver.close();
    await server.dispose();
  }
}

interface Session {
  readonly client: Redis;
  /** The queues of partition 0 (all of them with one partition), and the shared notify queue. */
  readonly queues: { readonly results: Queue; readonly history: Queue; readonly evaluate: Queue; readonly notify: Queue };
  /** Every partition's results and evaluate queues and the history queue: drained when the work is done. */
  readonly work: readonly Queue[];
  readonly workers: readonly ChildWorker[];
  readonly producer: ResultProducer;
  close(): Promise<void>;
}

/** A clean Redis and `processes` worker processes, listening on the queues; keys and queues in `partitions` partitions. */
async function openSession(line: Line, processes: number, quietAfterDays: number, workerArgs: readonly string[] = [], partitionCount = 1): Promise<Session> {
  const client = line.server.client();
  await client.flushall();
  const configFile = writeConfig(line.server.dir, { prefix: PREFIX, webhookUrl: line.receiver.url, quietAfterDays, partitions: partitionCount });
  const settings = resolveQueueSettings({ prefix: PREFIX });
  const partitions = new Partitions(PREFIX, partitionCount);
  const results = openPartitionedQueues(QUEUE_NAMES.results, client, settings, partitions);
  const evaluate = openPartitionedQueues(QUEUE_NAMES.evaluate, client, settings, partitions);
  const history = openSharedQueue(QUEUE_NAMES.history, client, settings, partitions);
  const queues = { results: results[0]!, history, evaluate: evaluate[0]!, notify: openSharedQueue(QUEUE_NAMES.notify, client, settings, partitions) };
  const work = [history, ...results, ...evaluate];
  const workers = Array.from({ length: processes }, () => startWorkerProcess(line.server.url, configFile, workerArgs));
  const producer = createResultProducer({ connection: client, prefix: PREFIX, partitions: partitionCount });
  const close = async () => {
    await producer.close();
    await Promise.all(workers.map((w) => w.stop()));
    await Promise.all([...work, queues.notify].map((q) => q.close()));
  };
  try {
    await workersListening([queues.results, queues.evaluate], processes, workers);
  } catch (e) {
    await close();
    throw e;
  }
  return { client, queues, work, workers, producer, close };
}

async function send(producer: ResultProducer, events: readonly ResultEvent[], batch: number): Promise<void> {
  for (let i = 0; i < events.length; i += batch) {
    const outcomes = await producer.add(events.slice(i, i + batch));
    const rejected = outcomes.find((r) => r.status !== 'accepted');
    if (rejected !== undefined) throw new Error(`the producer rejected ${rejected.sampleId}: ${JSON.stringify(rejected.errors)}`);
  }
}

/** Components whose last result has not reached the incident engine (must be none once the queues are drained). */
async function lagging(client: Redis, events: readonly ResultEvent[], partitions = 1): Promise<number> {
  const last = new Map<string, ResultEvent>();
  for (const e of events) last.set(`${e.unit}/${e.component}`, e);
  const storage = new RedisStore(client, { prefix: PREFIX, partitions });
  let behind = 0;
  for (const e of last.values()) if ((await storage.evaluationInput(e))?.latest?.position?.sampleId !== e.sampleId) behind++;
  return behind;
}

async function notifyJobs(queue: Queue): Promise<Job<NotifyEffect>[]> {
  return (await queue.getJobs(['waiting', 'active', 'delayed', 'completed', 'failed'], 0, -1)) as Job<NotifyEffect>[];
}

interface PhaseFigures {
  readonly perSec: number;
  readonly intakePerSec: number;
  readonly seconds: number;
  readonly notifications: number;
  readonly lagging: number;
  /** Worker processes' CPU milliseconds per result. */
  readonly workerCpuMs: number;
  /** Redis server time (all commands and scripts) per result, µs, and Lua script calls per result. */
  readonly redisUs: number;
  readonly redisScripts: number;
}

async function pipelinePhase(line: Line, events: readonly ResultEvent[], processes: number, log: RunOptions['log']): Promise<PhaseFigures> {
  const s = await openSession(line, processes, NEVER_QUIET_DAYS);
  try {
    const cpuBefore = s.workers.reduce((t, w) => t + w.cpuSeconds(), 0);
    await s.client.config('RESETSTAT');
    const t0 = performance.now();
    await send(s.producer, events, 100);
    const intake = performance.now();
    const end = await drainedAt([s.queues.results, s.queues.evaluate], s.workers);
    const seconds = (end - t0) / 1000;
    const cpu = s.workers.reduce((t, w) => t + w.cpuSeconds(), 0) - cpuBefore;
    const redis = await redisWork(s.client);
    const figures = {
      workerCpuMs: (1000 * cpu) / events.length,
      redisUs: redis.usec / events.length,
      redisScripts: redis.scriptCalls / events.length,
      perSec: events.length / seconds,
      intakePerSec: events.length / ((intake - t0) / 1000),
      seconds,
      notifications: (await notifyJobs(s.queues.notify)).length,
      lagging: await lagging(s.client, events),
    };
    log(`throughput: ${processes} worker process(es): ${fmt(figures.perSec)} results/s over ${fmt(seconds)} s`);
    return figures;
  } finally {
    await s.close();
  }
}

async function barePhase(line: Line, events: readonly ResultEvent[], concurrency: number, log: RunOptions['log']): Promise<{ perSec: number; seconds: number; concurrency: number }> {
  const client = line.server.client();
  await client.flushall();
  const settings = resolveQueueSettings({ prefix: PREFIX });
  const queue = new Queue('bare', { connection: client, prefix: PREFIX, defaultJobOptions: defaultJobOptions(settings) });
  const worker = startBareWorker(line.server.url, PREFIX, 'bare', concurrency);
  try {
    await workersListening([queue], 1, [worker]);
    const t0 = performance.now();
    for (let i = 0; i < events.length; i += 100) await queue.addBulk(events.slice(i, i + 100).map((data) => ({ name: 'result', data })));
    const seconds = ((await drainedAt([queue], [worker])) - t0) / 1000;
    log(`throughput: bare BullMQ worker, concurrency ${concurrency}: ${fmt(events.length / seconds)} jobs/s`);
    return { perSec: events.length / seconds, seconds, concurrency };
  } finally {
    await worker.stop();
    await queue.close();
  }
}

function costOf(f: PhaseFigures) {
  return { workerCpuMs: round(f.workerCpuMs), redisServerUs: round(f.redisUs), redisScriptCalls: round(f.redisScripts) };
}

/** The other concurrency the bare worker is measured at (the results worker's own was 8 before batches). */
const BARE_SMALL_CONCURRENCY = 8;

/** One worker process must reach at least this share of the bare worker's rate. */
const THROUGHPUT_RATIO_TARGET = 0.5;

export async function runThroughput(o: RunOptions): Promise<PartResult> {
  const missing = pipelineMissing();
  if (missing !== undefined) return skipped('throughput', missing);
  const components = size(o.scale, 160, 10);
  const perComponent = 25;
  return withLine(async (line) => {
    const events = labFeed({ components, samplesPerComponent: perComponent, faultyShare: 0.1, endsBeforeNowMs: 2 * DAY_MS, now: Date.now(), seed: o.seed, unitPrefix: 'TP' });
    // The bare worker at the results worker's concurrency and at BullMQ's usual small one: the faster is the baseline.
    const bares = [await barePhase(line, events, WORKER_DEFAULTS.resultsConcurrency, o.log), await barePhase(line, events, BARE_SMALL_CONCURRENCY, o.log)];
    const bare = bares.reduce((a, b) => (b.perSec > a.perSec ? b : a));
    const one = await pipelinePhase(line, events, 1, o.log);
    const two = await pipelinePhase(line, events, 2, o.log);
    const ratio = one.perSec / bare.perSec;
    const met = ratio >= THROUGHPUT_RATIO_TARGET;
    const lag = one.lagging + two.lagging;
    return {
      name: 'throughput',
      json: {
        workerPerSec: round(one.perSec),
        barePerSec: round(bare.perSec),
        bareConcurrency: bare.concurrency,
        bareRuns: bares.map((b) => ({ concurrency: b.concurrency, perSec: round(b.perSec) })),
        ratio: round(ratio),
        twoWorkersPerSec: round(two.perSec),
        twoWorkersRatio: round(two.perSec / bare.perSec),
        intakePerSec: round(one.intakePerSec),
        results: events.length,
        components,
        notificationsQueued: one.notifications,
        componentsNotFullyEvaluated: lag,
        perResult: { oneWorker: costOf(one), twoWorkers: costOf(two) },
        target: { ratioAtLeast: THROUGHPUT_RATIO_TARGET, met },
      },
      table: {
        columns: ['run', 'results/s', 'vs bare', 'seconds', 'notifications'],
        rows: [
          ...bares.map((b) => [`bare BullMQ no-op worker, concurrency ${b.concurrency}`, fmt(b.perSec), fmt(b.perSec / bare.perSec), fmt(b.seconds), '–']),
          ['1 worker process', fmt(one.perSec), fmt(ratio), fmt(one.seconds), String(one.notifications)],
          ['2 worker processes', fmt(two.perSec), fmt(two.perSec / bare.perSec), fmt(two.seconds), String(two.notifications)],
        ],
      },
      notes: [
        `${events.length} results (${components} components × ${perComponent}, interleaved by sampling time, 10 % with a tripling iron wear rate), enqueued by the result producer in batches of 100 as fast as it goes;`,
        `  end to end: stored, evaluated, findings fed to the incident store (results and evaluate queues drained; every component's last sample fed: ${lag === 0 ? 'yes' : `NO, ${lag} behind`})`,
        `bare: one BullMQ worker process, no-op processor, the same events added with addBulk (no validation), at the results worker's concurrency (${WORKER_DEFAULTS.resultsConcurrency}) and at ${BARE_SMALL_CONCURRENCY}; the faster (concurrency ${bare.concurrency}) is the baseline`,
        `notifications: notify jobs on the notify queue once the results are judged (waiting, delayed, active, failed, and the completed ones the queue keeps: its last 100), not every message sent`,
        `intake alone (validation + enqueue, 1 worker running): ${fmt(one.intakePerSec)} results/s`,
        `per result, 1 / 2 worker processes: worker CPU ${fmt(one.workerCpuMs)} / ${fmt(two.workerCpuMs)} ms, Redis server time ${fmt(one.redisUs)} / ${fmt(two.redisUs)} µs ` +
          `in ${fmt(one.redisScripts)} / ${fmt(two.redisScripts)} Lua script calls (INFO commandstats; includes the producer's and BullMQ's)`,
        `target: 1 worker process ≥ ${THROUGHPUT_RATIO_TARGET} × bare: ${met ? 'MET' : 'MISSED'} (${fmt(ratio)})`,
      ],
    };
  });
}

interface Stage {
  readonly p50: number;
  readonly p99: number;
  readonly count: number;
}

interface Phase {
  readonly rate: number;
  readonly seconds: number;
  readonly achievedRate: number;
  readonly notification: Stage;
  readonly evaluation: Stage;
  readonly notificationTypes: Record<string, number>;
  readonly unmatched: number;
  readonly backlog: { results: number; evaluate: number };
}

/** Offers `stream` at a steady `rate` and measures, per result, the time to its evaluation and to its notification. */
async function steadyPhase(s: Session, stream: readonly ResultEvent[], rate: number, evaluatedAt: ReadonlyMap<string, number>): Promise<Phase> {
  const enqueuedAt = new Map<string, number>();
  const backlog = { results: 0, evaluate: 0 };
  const start = Date.now();
  let sent = 0;
  let lookedAt = 0;
  while (sent < stream.length) {
    if (Date.now() - lookedAt >= 1000) {
      lookedAt = Date.now();
      backlog.results = Math.max(backlog.results, await s.queues.results.getWaitingCount());
      backlog.evaluate = Math.max(backlog.evaluate, await s.queues.evaluate.getWaitingCount());
    }
    const due = Math.min(stream.length, Math.floor(((Date.now() - start) / 1000) * rate));
    if (due > sent) {
      const batch = stream.slice(sent, due);
      const at = Date.now();
      for (const e of batch) enqueuedAt.set(e.sampleId, at);
      await send(s.producer, batch, batch.length);
      sent = due;
    }
    await sleep(5);
  }
  const seconds = (Date.now() - start) / 1000;
  await drainedAt([s.queues.results, s.queues.evaluate], s.workers);
  await drainedAt([s.queues.notify], s.workers, { delayedToo: false });
  // Completion events travel on a stream of their own; give the last ones time to arrive.
  await sleep(500);

  const toEvaluation = stream.map((e) => (evaluatedAt.get(e.sampleId) ?? NaN) - enqueuedAt.get(e.sampleId)!);
  const evaluation = toEvaluation.filter((x) => !Number.isNaN(x));
  const notificationTypes: Record<string, number> = {};
  const toNotification: number[] = [];
  for (const job of await notifyJobs(s.queues.notify)) {
    // An alarm-flood summary (held messages listed at the window's end) belongs to no one result.
    if (job.data.incident === undefined) continue;
    const queuedFor = enqueuedAt.get(job.data.incident.lastSampleId);
    if (queuedFor === undefined) continue;
    toNotification.push(job.timestamp - queuedFor);
    const type = job.data.type.replace('wearshift.incident.', '');
    notificationTypes[type] = (notificationTypes[type] ?? 0) + 1;
  }
  const stage = (xs: number[]): Stage => ({ p50: xs.length === 0 ? NaN : percentile(xs, 0.5), p99: xs.length === 0 ? NaN : percentile(xs, 0.99), count: xs.length });
  return {
    rate,
    seconds,
    achievedRate: stream.length / seconds,
    notification: stage(toNotification),
    evaluation: stage(evaluation),
    notificationTypes,
    unmatched: toEvaluation.length - evaluation.length,
    backlog,
  };
}

/** The rate the brief asks for, and a lower one that shows the latency without a queue. */
const LATENCY_RATES = [200, 50] as const;

export async function runLatency(o: RunOptions): Promise<PartResult> {
  const missing = pipelineMissing();
  if (missing !== undefined) return skipped('latency', missing);
  const durations = [Math.max(5, 20 * o.scale), Math.max(5, 10 * o.scale)];
  const counts = LATENCY_RATES.map((rate, i) => Math.round(rate * durations[i]!));
  const components = size(o.scale, 300, 20);
  const history = 16;
  const perComponent = history + Math.ceil(counts.reduce((a, b) => a + b, 0) / components);
  return withLine(async (line) => {
    const feed = labFeed({ components, samplesPerComponent: perComponent, faultyShare: 0.2, endsBeforeNowMs: 3_600_000, now: Date.now(), seed: o.seed + 1, unitPrefix: 'LT' });
    const seen = new Map<string, number>();
    const preload: ResultEvent[] = [];
    const later: ResultEvent[] = [];
    for (const e of feed) {
      const n = seen.get(e.unit) ?? 0;
      seen.set(e.unit, n + 1);
      (n < history ? preload : later).push(e);
    }
    const s = await openSession(line, 1, NEVER_QUIET_DAYS);
    // A result is evaluated in its own results job when its component is free, else by an evaluate job after it.
    const events = new QueueEvents(QUEUE_NAMES.results, { connection: line.server.client(), prefix: PREFIX });
    try {
      await send(s.producer, preload, 500);
      await drainedAt([s.queues.results, s.queues.evaluate], s.workers);
      await drainedAt([s.queues.notify], s.workers, { delayedToo: false });
      const evaluatedAt = new Map<string, number>();
      events.on('completed', ({ returnvalue }) => {
        const at = Date.now();
        const value = (typeof returnvalue === 'string' ? JSON.parse(returnvalue) : returnvalue) as { sampleId?: string } | null;
        if (value?.sampleId !== undefined && !evaluatedAt.has(value.sampleId)) evaluatedAt.set(value.sampleId, at);
      });
      await events.waitUntilReady();
      const phases: Phase[] = [];
      let from = 0;
      for (const [i, rate] of LATENCY_RATES.entries()) {
        const stream = later.slice(from, from + counts[i]!);
        from += counts[i]!;
        o.log(`latency: ${preload.length} results of history loaded; streaming ${stream.length} at ${rate}/s`);
        phases.push(await steadyPhase(s, stream, rate, evaluatedAt));
      }
      const [main, low] = phases as [Phase, Phase];
      const phaseJson = (p: Phase) => ({
        rate: p.rate,
        achievedRate: round(p.achievedRate),
        seconds: round(p.seconds),
        notificationP50Ms: round(p.notification.p50),
        notificationP99Ms: round(p.notification.p99),
        notifications: p.notification.count,
        notificationTypes: p.notificationTypes,
        evaluationP50Ms: round(p.evaluation.p50),
        evaluationP99Ms: round(p.evaluation.p99),
        evaluated: p.evaluation.count,
        unmatched: p.unmatched,
        peakResultsWaiting: p.backlog.results,
        peakEvaluationsWaiting: p.backlog.evaluate,
      });
      return {
        name: 'latency',
        json: {
          endpoint: 'notification queued (notify job created), and evaluation completed',
          ...phaseJson(main),
          lowerRate: phaseJson(low),
          historyLoaded: preload.length,
          components,
        },
        table: {
          columns: ['rate', 'from enqueue to', 'p50 ms', 'p99 ms', 'results', 'evaluations waiting (max)'],
          rows: phases.flatMap((p) => [
            [`${p.rate}/s`, 'notification queued', fmt(p.notification.p50), fmt(p.notification.p99), String(p.notification.count), String(p.backlog.evaluate)],
            [`${p.rate}/s`, 'results job completed', fmt(p.evaluation.p50), fmt(p.evaluation.p99), String(p.evaluation.count), String(p.backlog.evaluate)],
          ]),
        },
        notes: [
          `${components} components holding ${history} results each, then ${phases.map((p) => `${fmt(p.seconds)} s at ${p.rate}/s (achieved ${fmt(p.achievedRate)})`).join(', then ')}; one worker process`,
          `notification queued: the notify job of an incident the result opened, updated or returned (the job's creation time); ` +
            phases.map((p) => `${p.rate}/s: ${Object.entries(p.notificationTypes).map(([t, n]) => `${t} ${n}`).join(', ') || 'none'}`).join('; '),
          `results job completed: the result stored, and evaluated in the same job when its component was free, as the job's completion event reaches the producer's process` +
            (phases.some((p) => p.unmatched > 0) ? `; ${phases.map((p) => p.unmatched).join(' / ')} results matched no completion event` : ''),
          `evaluations waiting: looked at every second; at most one waits per component, so a full queue means the evaluate stage is saturated`,
        ],
      };
    } finally {
      await events.close();
      await s.close();
    }
  });
}

/** Redis bytes of one component's own keys at 100 samples. */
const COMPONENT_BYTES_TARGET = 40 * 1024;
/** The backfill of 100 000 results over 1 000 components, on 2 cores. */
const BACKFILL_SECONDS_TARGET = 60;

/** History threads of the measured backfill run (`wearshift worker --history-threads`), beside a run without. */
const BACKFILL_HISTORY_THREADS = 2;
/** Partitions of the third backfill run (`redis.partitions`). */
const BACKFILL_PARTITIONS = 4;

interface BackfillRun {
  readonly threads: number;
  readonly partitions: number;
  readonly seconds: number;
  readonly intakeSeconds: number;
  readonly peakRssKb: number;
  readonly perComponentBytes: number;
  readonly keys: Record<string, number>;
  readonly componentParts: Record<string, number>;
  /** Incident records on file, open and closed, and the mean length of their stored values. */
  readonly incidents: IncidentRecordFigures;
  readonly behind: number;
  readonly notifications: number;
}

/** One backfill of `events` into a clean Redis, with one worker process using `threads` history threads. */
async function backfillRun(line: Line, events: readonly ResultEvent[], threads: number, o: RunOptions, partitions = 1): Promise<BackfillRun> {
  // The default backfill setting: findings on samples older than 30 days are recorded but page nobody.
  const s = await openSession(line, 1, 30, ['--history-threads', String(threads)], partitions);
  try {
    const before = await usedMemory(s.client);
    const t0 = performance.now();
    // As `wearshift import --history` sends them: validated, then a history job of 10 000 results at a time.
    for (let i = 0; i < events.length; i += HISTORY_JOB_SIZE) {
      const chunk = events.slice(i, i + HISTORY_JOB_SIZE);
      const validated = validateBatch(chunk, { now: Date.now() });
      if (validated.accepted.length !== chunk.length) throw new Error(`backfill: ${chunk.length - validated.accepted.length} invented results did not validate`);
      const refused = (await s.producer.enqueueHistory(validated.accepted, HISTORY_JOB_SIZE)).find((r) => r.status !== 'accepted');
      if (refused !== undefined) throw new Error(`the producer refused ${refused.sampleId}: ${JSON.stringify(refused.errors)}`);
    }
    const intake = performance.now();
    o.log(`backfill (${threads} history threads): ${events.length} results enqueued in ${Math.ceil(events.length / HISTORY_JOB_SIZE)} history jobs in ${fmt((intake - t0) / 1000)} s`);
    const end = await drainedAt(s.work, s.workers, { pollMs: 200 });
    const after = await usedMemory(s.client);
    return {
      threads,
      partitions,
      seconds: (end - t0) / 1000,
      intakeSeconds: (intake - t0) / 1000,
      peakRssKb: s.workers[0]!.peakRssKb(),
      perComponentBytes: after - before,
      keys: await memoryByKind(s.client),
      componentParts: await memoryByKind(s.client, 'c:*'),
      incidents: await incidentRecordFigures(s.client),
      behind: await lagging(s.client, events, partitions),
      notifications: (await notifyJobs(s.queues.notify)).length,
    };
  } finally {
    await s.close();
  }
}

export async function runBackfill(o: RunOptions): Promise<PartResult> {
  const missing = pipelineMissing();
  if (missing !== undefined) return skipped('backfill', missing);
  const components = size(o.scale, 1000, 10);
  const perComponent = 100;
  return withLine(async (line) => {
    const events = labFeed({ components, samplesPerComponent: perComponent, faultyShare: 0.05, endsBeforeNowMs: 90 * DAY_MS, now: Date.now(), seed: o.seed + 2, unitPrefix: 'BF' });
    // The same results, first on the worker's own thread alone, then with history threads (each run from an empty Redis).
    // And with the keys in BACKFILL_PARTITIONS partitions (as on a Redis Cluster; here one Redis): one history queue
    // for all of them.
    const runs = [
      await backfillRun(line, events, 0, o),
      await backfillRun(line, events, BACKFILL_HISTORY_THREADS, o),
      await backfillRun(line, events, BACKFILL_HISTORY_THREADS, o, BACKFILL_PARTITIONS),
    ];
    const measured = runs[1]!;
    const { keys, componentParts } = measured;
    // The component's own keys (MEMORY USAGE summed over them), per component, and everything the store keeps for it:
    // those, its incident records and indexes, its group's statistics and its registry entry (not the queues, whose
    // jobs are removed once done). The storage target is judged on the second.
    const componentKeysBytes = (keys.c ?? 0) / components;
    const storeBytes = Object.entries(keys).reduce((sum, [kind, bytes]) => (kind.startsWith('queue ') ? sum : sum + bytes), 0) / components;
    const storageMet = storeBytes <= COMPONENT_BYTES_TARGET;
    const inc = measured.incidents;
    const timeMet = measured.seconds <= BACKFILL_SECONDS_TARGET;
    const runJson = (r: BackfillRun) => ({
      historyThreads: r.threads,
      partitions: r.partitions,
      wallSeconds: round(r.seconds),
      resultsPerSec: round(events.length / r.seconds),
      intakeSeconds: round(r.intakeSeconds),
      workerPeakRssMb: round(r.peakRssKb / 1024),
      redisUsedMemoryDeltaMb: round(r.perComponentBytes / 2 ** 20),
      redisBytesPerComponent: round(r.perComponentBytes / components),
      notificationsQueued: r.notifications,
      componentsNotFullyEvaluated: r.behind,
    });
    return {
      name: 'backfill',
      json: {
        results: events.length,
        components,
        ...runJson(measured),
        withoutThreads: runJson(runs[0]!),
        partitioned: runJson(runs[2]!),
        speedup: round(runs[0]!.seconds / measured.seconds),
        timeTarget: { wallSecondsAtMost: BACKFILL_SECONDS_TARGET, met: timeMet },
        redisBytesByKind: keys,
        componentKeysBytesByKind: Object.fromEntries(Object.entries(componentParts).map(([k, b]) => [k, round(b / components)])),
        componentKeysBytes: round(componentKeysBytes),
        storeBytesPerComponent: round(storeBytes),
        incidentRecords: { open: inc.open, closed: inc.closed, perComponent: round((inc.open + inc.closed) / components), openTextBytes: round(inc.openTextBytes), closedTextBytes: round(inc.closedTextBytes) },
        storageTarget: { storeBytesPerComponentAtMost: COMPONENT_BYTES_TARGET, met: storageMet },
      },
      table: {
        columns: ['results', 'components', 'history threads', 'partitions', 'wall s', 'results/s', 'worker peak RSS MB', 'Redis KB / component'],
        rows: runs.map((r) => [String(events.length), String(components), String(r.threads), String(r.partitions), fmt(r.seconds), fmt(events.length / r.seconds), fmt(r.peakRssKb / 1024), fmt(r.perComponentBytes / components / 1024)]),
      },
      notes: [
        `${perComponent} results per component over ${fmt((perComponent * 250) / 8760)} years of operation, all older than 90 days (quiet: ${runs.map((r) => r.notifications).join(' / ')} notifications), in sampling-time order, enqueued as history jobs of ${HISTORY_JOB_SIZE} results (as \`wearshift import --history\` does) while one worker process runs, first without history threads, then with \`--history-threads ${BACKFILL_HISTORY_THREADS}\`, then so with the keys in ${BACKFILL_PARTITIONS} partitions (\`redis.partitions\`; one Redis), each from an empty Redis`,
        `with ${BACKFILL_HISTORY_THREADS} history threads: ${fmt(measured.seconds)} s, ${fmt(runs[0]!.seconds / measured.seconds)} times as fast as the worker's own thread alone in the same run; target ≤ ${BACKFILL_SECONDS_TARGET} s: ${timeMet ? 'MET' : 'MISSED'}`,
        `wall time: first enqueue to history, results and evaluate queues drained; every component's last sample fed: ${runs.every((r) => r.behind === 0) ? 'yes' : `NO, ${runs.map((r) => r.behind).join(' / ')} behind`}`,
        `worker peak RSS: VmHWM of the worker process (its threads included); Redis: INFO used_memory after − before, per component`,
        `a component's own keys (c:…, MEMORY USAGE) at ${perComponent} samples: ${fmt(componentKeysBytes / 1024)} KB`,
        `incident records: ${fmt((inc.open + inc.closed) / components)} per component (${inc.open} open, ${inc.closed} closed; this fleet's group limits open and close them charge by charge), stored texts (deflated) ${fmt(inc.openTextBytes / 1024)} KB per open one and ${fmt(inc.closedTextBytes / 1024)} KB per closed one`,
        `everything the store keeps per component (its own keys, incident records and indexes, group statistics, registry; MEMORY USAGE, queues left out): ${fmt(storeBytes / 1024)} KB; target ≤ ${COMPONENT_BYTES_TARGET / 1024} KB: ${storageMet ? 'MET' : 'MISSED'}`,
        `a component's own keys by kind (MEMORY USAGE, KB per component): ${Object.entries(componentParts)
          .sort(([a], [b]) => (a < b ? -1 : 1))
          .map(([k, b]) => `${k} ${fmt(b / 1024 / components)}`)
          .join(', ')}`,
        `Redis by key kind (MEMORY USAGE, KB per component): ${Object.entries(keys)
          .map(([k, b]) => `${k} ${fmt(b / 1024 / components)}`)
          .join(', ')}`,
      ],
    };
  });
}

interface IncidentRecordFigures {
  readonly open: number;
  readonly closed: number;
  /** Mean length of the stored text of an open and of a closed record, bytes. */
  readonly openTextBytes: number;
  readonly closedTextBytes: number;
}

/** The incident records of every partition: how many are open and closed, and how long their stored texts are. */
async function incidentRecordFigures(client: Redis): Promise<IncidentRecordFigures> {
  const sums = { open: 0, closed: 0, openBytes: 0, closedBytes: 0 };
  let cursor = '0';
  do {
    const [next, keys] = await client.scan(cursor, 'MATCH', `${PREFIX}*:inc:records`, 'COUNT', 1000);
    cursor = next;
    for (const key of keys) {
      // Read as bytes: the records are stored deflated (compactText.ts, z3).
      let field = '0';
      do {
        const [after, flat] = await client.hscanBuffer(key, field, 'COUNT', 500);
        field = after.toString();
        for (let i = 1; i < flat.length; i += 2) {
          const closed = incidentOfRecord(flat[i]!).closed !== null;
          sums[closed ? 'closed' : 'open'] += 1;
          sums[closed ? 'closedBytes' : 'openBytes'] += flat[i]!.length;
        }
      } while (field !== '0');
    }
  } while (cursor !== '0');
  return { open: sums.open, closed: sums.closed, openTextBytes: sums.openBytes / Math.max(1, sums.open), closedTextBytes: sums.closedBytes / Math.max(1, sums.closed) };
}

async function usedMemory(client: Redis): Promise<number> {
  const info = await client.info('memory');
  return Number(/used_memory:(\d+)/.exec(info)?.[1] ?? NaN);
}

/**
 * Bytes held per kind of key: the stored state by its key family, BullMQ's keys by queue; with `within` (`c:*`),
 * the keys of that family by their last part (a component's `rev`, `win`, `ord`, `ev`, `steps`, `inc`).
 */
async function memoryByKind(client: Redis, within?: string): Promise<Record<string, number>> {
  const totals: Record<string, number> = {};
  let cursor = '0';
  do {
    const [next, keys] = await client.scan(cursor, 'MATCH', `${PREFIX}:${within ?? '*'}`, 'COUNT', 1000);
    cursor = next;
    const pipeline = client.pipeline();
    for (const key of keys) pipeline.memory('USAGE', key, 'SAMPLES', 0);
    const sizes = (await pipeline.exec()) ?? [];
    keys.forEach((key, i) => {
      const parts = key.slice(PREFIX.length + 1).split(':');
      const queue = (Object.values(QUEUE_NAMES) as string[]).includes(parts[0]!);
      const kind = within !== undefined ? parts.at(-1)! : queue ? `queue ${parts[0]}` : parts.slice(0, parts[0] === 'store' || parts[0] === 'eval' ? 2 : 1).join(':');
      totals[kind] = (totals[kind] ?? 0) + Number(sizes[i]?.[1] ?? 0);
    });
  } while (cursor !== '0');
  return totals;
}

/** The group of the current results that are not of the backlog's group (not configured: the defaults judge it). */
const OTHER_GROUP = 'bench-line-two';
const HOUR_MS = 3_600_000;

interface GroupBacklogPhase {
  /** From the current results' queuing to each one's component judged up to it, ms. */
  readonly judged: { readonly p50: number; readonly max: number };
  /** From the first result queued until both queues drained, ms. */
  readonly drainedMs: number;
  readonly lagging: number;
}

/** Two worker processes; `backlog` queued, then `current`: when is each current result judged, and when is all drained. */
async function groupBacklogPhase(line: Line, backlog: readonly ResultEvent[], current: readonly ResultEvent[]): Promise<GroupBacklogPhase> {
  const s = await openSession(line, 2, NEVER_QUIET_DAYS);
  try {
    const storage = new RedisStore(s.client, { prefix: PREFIX });
    const t0 = performance.now();
    await send(s.producer, backlog, 100);
    const queued = performance.now();
    await send(s.producer, current, 100);
    // Each component's last current result, looked for every 20 ms until judged (its evaluation's position).
    const last = new Map<string, ResultEvent>();
    for (const e of current) last.set(`${e.unit}/${e.component}`, e);
    const waits: number[] = [];
    const deadline = performance.now() + 600_000;
    while (last.size > 0 && performance.now() < deadline) {
      for (const [key, e] of last) {
        if ((await storage.evaluationInput(e))?.latest?.position?.sampleId !== e.sampleId) continue;
        waits.push(performance.now() - queued);
        last.delete(key);
      }
      await sleep(20);
    }
    if (last.size > 0) throw new Error(`${last.size} current results not judged within 600 s`);
    const drained = await drainedAt([s.queues.results, s.queues.evaluate], s.workers);
    return { judged: { p50: percentile(waits, 0.5), max: Math.max(...waits) }, drainedMs: drained - t0, lagging: await lagging(s.client, [...backlog, ...current]) };
  } finally {
    await s.close();
  }
}

export async function runGroupBacklog(o: RunOptions): Promise<PartResult> {
  const missing = pipelineMissing();
  if (missing !== undefined) return skipped('group-backlog', missing);
  const now = Date.now();
  const backlog = labFeed({ components: size(o.scale, 80, 10), samplesPerComponent: 25, faultyShare: 0.1, endsBeforeNowMs: 3 * DAY_MS, now, seed: o.seed, unitPrefix: 'GB' });
  // Two results each over the last weeks, those sampled within the last 20 days up to an hour ago.
  const current = labFeed({ components: size(o.scale, 40, 5), samplesPerComponent: 2, faultyShare: 0, endsBeforeNowMs: HOUR_MS, now, seed: o.seed + 1, unitPrefix: 'GC' }).filter(
    (e) => Date.parse(e.sampledAt) > now - 20 * DAY_MS && Date.parse(e.sampledAt) < now - HOUR_MS,
  );
  return withLine(async (line) => {
    const same = await groupBacklogPhase(line, backlog, current);
    o.log(`group-backlog: current results of the backlog's group judged after ${fmt(same.judged.p50)} ms (median)`);
    const other = await groupBacklogPhase(
      line,
      backlog,
      current.map((e) => ({ ...e, group: OTHER_GROUP })),
    );
    o.log(`group-backlog: current results of another group judged after ${fmt(other.judged.p50)} ms (median)`);
    const row = (label: string, p: GroupBacklogPhase) => [label, fmt(p.judged.p50), fmt(p.judged.max), fmt(p.drainedMs)];
    const lag = same.lagging + other.lagging;
    return {
      name: 'group-backlog',
      json: {
        backlogResults: backlog.length,
        currentResults: current.length,
        sameGroup: { judgedP50Ms: round(same.judged.p50), judgedMaxMs: round(same.judged.max), drainedMs: round(same.drainedMs) },
        otherGroup: { judgedP50Ms: round(other.judged.p50), judgedMaxMs: round(other.judged.max), drainedMs: round(other.drainedMs) },
        ratio: round(other.judged.p50 / same.judged.p50),
        componentsNotFullyEvaluated: lag,
      },
      table: {
        columns: ['current results', 'judged after, median ms', 'max ms', 'all drained after, ms'],
        rows: [row(`of the backlog's group (${PIPELINE_GROUP})`, same), row(`of another group (${OTHER_GROUP})`, other)],
      },
      notes: [
        `2 worker processes; ${backlog.length} results of ${size(o.scale, 80, 10)} gearboxes over about 12 months queued by the result producer, then ${current.length} current results of ${size(o.scale, 40, 5)} others;`,
        `  judged after: from the current results' queuing until each component's evaluation has reached its last current result`,
        `another group's current results judged after ${fmt(other.judged.p50 / same.judged.p50)} × the time of the backlog's group's (median); every component's last sample fed: ${lag === 0 ? 'yes' : `NO, ${lag} behind`}`,
      ],
    };
  });
}
