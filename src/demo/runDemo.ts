/**
 * The demo fleet end to end in one process: a private Redis (or REDIS_URL under a key prefix of its own), the
 * workers and the HTTP API as `wearshift serve` starts them, a real SMTP server and a webhook endpoint as the
 * receivers. The fleet's lab reports go through POST /v1/results in report order with time compressed; an
 * on-call engineer acknowledges the PS2-P3 gearbox from its e-mail link; nobody answers for the GEN-3 engine,
 * so it escalates; once the feed has settled, a reliability engineer says that the rate GEN-1's standing watch is on is
 * the engine's usual one (usualRateWord.ts). What was found, told, acknowledged and escalated is read back from the
 * store and returned.
 */
import { randomBytes } from 'node:crypto';
import { mkdirSync, readdirSync, rmSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import type { Queue } from 'bullmq';
import type { Config } from '../domain/config.ts';
import { loadConfig } from '../runtime/loadConfig.ts';
import { RULE_FAMILIES, type RuleFamily } from '../domain/finding.ts';
import type { Incident } from '../incidents/model.ts';
import { incidentRules } from '../incidents/policy.ts';
import { RedisIncidents } from '../redis/redisIncidents.ts';
import { openQueue, QUEUE_NAMES, resolveQueueSettings } from '../queue/queues.ts';
import { freePort, startEmbeddedRedis, type EmbeddedRedis } from '../runtime/embeddedRedis.ts';
import { createLogger, type Logger } from '../telemetry/logger.ts';
import { connectRedis } from '../redis/connection.ts';
import { startServices } from '../runtime/services.ts';
import { closeAll, type Closer } from '../runtime/shutdown.ts';
import { RedisStore } from '../redis/redisStore.ts';
import { planFeed, type FeedPlan } from './feedPlan.ts';
import { DEMO_STORIES, demoFleet } from './fleet.ts';
import { startMailReceiver, type ReceivedMail } from './mailReceiver.ts';
import { acknowledgeByMail, ackLinkOf, incidentIdOf, type AckAttempt } from './mailResponder.ts';
import { componentTimeline, type ComponentTimeline } from './timeline.ts';
import { startWebhookReceiver } from './webhookReceiver.ts';
import { sayUsualRate, USUAL_RATE_UNIT, type UsualRateWord } from './usualRateWord.ts';

export interface DemoOptions {
  /** Where the received e-mails (.eml) and webhook deliveries (.json) are written. */
  readonly outDir: string;
  /** The demo configuration. Default `demo/config.yaml` of the package (DEMO_CONFIG_FILE), wherever the command runs. */
  readonly configFile?: string;
  /** How long the playback of the 18 months of lab reports takes. Default 30 s. */
  readonly feedSeconds?: number;
  /** Longest wait after the playback for the pipeline to settle and the escalation to happen. Default 60 s. */
  readonly settleSeconds?: number;
  /** Leave the API and the receivers running; the caller closes them with `close()`. Default false. */
  readonly keepOpen?: boolean;
  readonly env?: NodeJS.ProcessEnv;
  /** Progress lines for people, as the run goes. */
  readonly progress?: (line: string) => void;
  readonly logger?: Logger;
  /** Aborting stops the run; everything it started is closed before runDemo rejects. */
  readonly signal?: AbortSignal;
}

export class DemoInterrupted extends Error {
  override readonly name = 'DemoInterrupted';
  constructor() {
    super('demo interrupted; the Redis, receivers and services it started are stopped');
  }
}

/**
 * The demo configuration comes with the package: found next to the sources (src/ or the build in dist/), so that
 * `wearshift demo` runs from any directory.
 */
export const DEMO_CONFIG_FILE = fileURLToPath(new URL('../../demo/config.yaml', import.meta.url));

export const DEMO_DEFAULTS = { configFile: DEMO_CONFIG_FILE, feedSeconds: 30, settleSeconds: 60 } as const;

/** Who answers the PS2-P3 gearbox mails in the demo (a role, not a person). */
export const DEMO_RESPONDER = 'pump-station on-call';
const ACK_UNIT = DEMO_STORIES[0]!;
const ESCALATING_UNIT = DEMO_STORIES[1]!;
const ESCALATION_TIER = 2;

export interface DemoIncident {
  readonly id: string;
  readonly unit: string;
  readonly component: string;
  readonly severity: string;
  readonly state: string;
  readonly acknowledgedBy?: string;
  /** Highest tier told in the incident's current escalation chain. */
  readonly reachedTier: number;
  /** Highest tier ever told, over every chain of the incident. */
  readonly highestTierTold: number;
  readonly notifications: number;
}

export interface DemoReport {
  readonly redis: 'embedded' | 'REDIS_URL';
  readonly prefix: string;
  readonly apiUrl: string;
  readonly shiftMonths: number;
  readonly quietAfterDays: number;
  readonly samplePeriod: { readonly from: string; readonly to: string };
  readonly resultsSent: number;
  readonly resultsAccepted: number;
  readonly resultsRejected: number;
  readonly timelines: readonly ComponentTimeline[];
  /** Findings per rule family over every stored step (as the latest evaluation of each component sees them). */
  readonly findingsByRule: Readonly<Record<RuleFamily, number>>;
  readonly incidents: readonly DemoIncident[];
  readonly mails: readonly { readonly seq: number; readonly to: string; readonly subject: string; readonly file: string }[];
  readonly webhooks: readonly { readonly seq: number; readonly type: string; readonly verified: boolean; readonly file: string }[];
  readonly acknowledgements: readonly AckAttempt[];
  /**
   * The reliability engineer's word that GEN-1's signalled rate is its usual one, and the watch's state after it; null
   * when no watch stood on it.
   */
  readonly usualRate: (UsualRateWord & { readonly stateAfter: string }) | null;
  /** Jobs that failed for good, per queue, with the first reason. */
  readonly failedJobs: readonly { readonly queue: string; readonly count: number; readonly reason: string }[];
  /** The demo's own checks of its story; all true on a good run. */
  readonly checks: {
    readonly caughtBeforeFixedLimit: boolean;
    readonly acknowledged: boolean;
    readonly escalated: boolean;
    /** The word was taken and the standing watch returned to normal. */
    readonly usualRateEndsWatch: boolean;
    readonly webhooksVerified: boolean;
    readonly settled: boolean;
    readonly noFailedJobs: boolean;
  };
  readonly seconds: { readonly feed: number; readonly total: number };
}

export interface DemoRun {
  readonly report: DemoReport;
  /** Set with `keepOpen`: a viewer token for the API and the board. */
  readonly viewerToken?: string;
  /** Set with `keepOpen`: a responder token, to acknowledge, shelve and resolve on the board. */
  readonly responderToken?: string;
  /** Closes what is still running (everything, with `keepOpen`; nothing otherwise). */
  close(): Promise<void>;
}

const token = () => randomBytes(18).toString('base64url');

export async function runDemo(options: DemoOptions): Promise<DemoRun> {
  const started = Date.now();
  const env = options.env ?? process.env;
  const say = options.progress ?? (() => {});
  const logger = options.logger ?? createLogger({ level: env.LOG_LEVEL ?? 'warn', base: { role: 'demo' } });
  const feedMs = (options.feedSeconds ?? DEMO_DEFAULTS.feedSeconds) * 1000;
  const settleMs = (options.settleSeconds ?? DEMO_DEFAULTS.settleSeconds) * 1000;
  const closers: Closer[] = [];
  const closeEverything = async () => {
    await closeAll(closers.splice(0).reverse(), { timeoutMs: 15_000, logger });
  };

  const checkAborted = () => {
    if (options.signal?.aborted) throw new DemoInterrupted();
  };
  try {
    // Read first: a configuration that cannot be read stops the demo before it starts anything.
    const fileConfig = loadConfig(options.configFile ?? DEMO_DEFAULTS.configFile);
    // Redis: a private server unless REDIS_URL names one; then a key prefix of this run's own keeps every
    // other key out of reach, and only keys under that prefix are removed at the end.
    let redis: EmbeddedRedis | undefined;
    let url = env.REDIS_URL;
    const prefix = url ? `{wearshift-demo-${randomBytes(4).toString('hex')}}` : '{wearshift}';
    if (!url) {
      redis = await startEmbeddedRedis();
      closers.push({ name: 'embedded redis', close: () => redis!.dispose() });
      url = redis.url;
    }

    const mail = await startMailReceiver();
    closers.push({ name: 'smtp receiver', close: () => mail.close() });
    // DEMO_WEBHOOK_SECRET lets a receiver outside the demo (or a test) check the deliveries written out.
    const webhookSecret = env.DEMO_WEBHOOK_SECRET || `whsec_${randomBytes(24).toString('base64')}`;
    const hooks = await startWebhookReceiver(webhookSecret);
    closers.push({ name: 'webhook receiver', close: () => hooks.close() });
    const port = await freePort();
    const apiUrl = `http://127.0.0.1:${port}`;

    const config = demoConfig(fileConfig, { prefix, smtpPort: mail.port, webhookUrl: hooks.url, apiUrl });
    const tokens = { ingest: token(), responder: token(), viewer: token() };
    // The services take the API's tokens from the environment they are handed, not from the process's.
    const serviceEnv = {
      ...env,
      REDIS_URL: url,
      DEMO_WEBHOOK_SECRET: webhookSecret,
      DEMO_ACK_SECRET: token(),
      WEARSHIFT_TOKEN_INGEST: tokens.ingest,
      WEARSHIFT_TOKEN_RESPONDER: tokens.responder,
      WEARSHIFT_TOKEN_VIEWER: tokens.viewer,
    };

    if (redis === undefined) closers.push({ name: 'demo keys', close: () => deleteKeys(url!, prefix, logger) });
    const services = await startServices({ workers: true, http: true, config, logger, port, host: '127.0.0.1', env: serviceEnv, workerSettings: { outboxIntervalMs: 250 } });
    closers.push({ name: 'wearshift services', close: () => closeAll(services.closers, { timeoutMs: 10_000, logger }) });
    const conn = connectRedis(url, 'worker', logger);
    closers.push({ name: 'demo redis connection', close: () => conn.quit().catch(() => conn.disconnect()) });
    const store = new RedisIncidents(conn, { rules: incidentRules(config), prefix });
    const storage = new RedisStore(conn, { prefix, config });
    const queueSettings = resolveQueueSettings({ prefix });
    const queues = [QUEUE_NAMES.results, QUEUE_NAMES.evaluate, QUEUE_NAMES.notify].map((n) => openQueue(n, conn, queueSettings));
    closers.push({ name: 'demo queues', close: () => Promise.all(queues.map((q) => q.close())) });

    // The on-call engineer answers every PS2-P3 gearbox mail that asks for an acknowledgement, one at a time.
    const acknowledgements: AckAttempt[] = [];
    let answering: Promise<void> = Promise.resolve();
    mail.onMail((m: ReceivedMail) => {
      const id = incidentIdOf(m);
      if (m.parsed.headers.get('x-wearshift-event') === 'escalated') say(`  ${seconds(started)}  ${id ?? 'an incident'} not acknowledged: escalation mail #${m.seq} to ${m.to.join(', ')}`);
      if (id === undefined || !id.startsWith(`${ACK_UNIT.unit}/${ACK_UNIT.component}`) || ackLinkOf(m) === undefined) return;
      answering = answering.then(async () => {
        const attempt = await acknowledgeByMail(m, DEMO_RESPONDER, 'Taking this: will pull a confirmation sample and check the bearing temperatures.').catch(
          (): AckAttempt => ({ incidentId: id, mailSeq: m.seq, recipient: m.to[0] ?? '', by: DEMO_RESPONDER, outcome: 'refused' }),
        );
        acknowledgements.push(attempt);
        if (attempt.outcome === 'acknowledged') say(`  ${seconds(started)}  ${DEMO_RESPONDER} acknowledged ${attempt.incidentId} from the link in mail #${attempt.mailSeq} to ${attempt.recipient}`);
      });
    });

    const plan = planFeed(demoFleet(), { now: Date.now(), durationMs: feedMs });
    say(`Feeding ${plan.results.length} lab reports (${plan.firstSampledAt.slice(0, 10)} … ${plan.lastSampledAt.slice(0, 10)}) into ${apiUrl}/v1/results over ${feedMs / 1000} s`);
    const feedStarted = Date.now();
    checkAborted();
    const fed = await feed(plan, `${apiUrl}/v1/results`, tokens.ingest, say, started, checkAborted);
    const feedSeconds = (Date.now() - feedStarted) / 1000;

    say(`Waiting for the pipeline to settle and for ${ESCALATING_UNIT.unit} ${ESCALATING_UNIT.component} to reach tier ${ESCALATION_TIER} (nobody answers its mails) …`);
    const storySettled = await settle({ queues, store, settleMs, checkAborted, isDone: async () => (await answering.then(() => true)) && (await storyDone(store)) });
    await answering;

    // The standing watch on a healthy engine: the reliability engineer's word that its rate is the usual one.
    checkAborted();
    const word = await sayUsualRate(store, apiUrl, tokens.responder);
    if (word !== undefined) say(`  ${seconds(started)}  ${word.by} says the rate signalled at ${word.sampleId} is ${USUAL_RATE_UNIT.unit}'s usual one (${word.incidentId}): HTTP ${word.status}`);
    const settled = storySettled && (word === undefined || (await settle({ queues, store, settleMs, checkAborted, isDone: async () => true })));

    const failedJobs = await readFailedJobs(queues);
    const timelines = await readTimelines(storage, config.incidents.returnAfterSamples);
    const findingsByRule = await countFindings(storage);
    const incidents = await readIncidents(store);
    const files = writeOut(options.outDir, mail.received, hooks.received);

    const ack = incidents.find((i) => i.unit === ACK_UNIT.unit && i.component === ACK_UNIT.component);
    const esc = incidents.find((i) => i.unit === ESCALATING_UNIT.unit && i.component === ESCALATING_UNIT.component);
    const watched = word === undefined ? undefined : incidents.find((i) => i.id === word.incidentId);
    const story = timelines.find((t) => t.unit === ACK_UNIT.unit && t.component === ACK_UNIT.component);
    const report: DemoReport = {
      redis: redis === undefined ? 'REDIS_URL' : 'embedded',
      prefix,
      apiUrl,
      shiftMonths: plan.shiftMonths,
      quietAfterDays: config.backfill.quietAfterDays,
      samplePeriod: { from: plan.firstSampledAt, to: plan.lastSampledAt },
      resultsSent: plan.results.length,
      resultsAccepted: fed.accepted,
      resultsRejected: fed.rejected,
      timelines,
      findingsByRule,
      incidents,
      mails: files.mails,
      webhooks: files.webhooks,
      acknowledgements,
      usualRate: word === undefined ? null : { ...word, stateAfter: watched?.state ?? 'unknown' },
      failedJobs,
      checks: {
        caughtBeforeFixedLimit: (story?.samplesAhead ?? 0) > 0,
        acknowledged: ack?.acknowledgedBy === DEMO_RESPONDER,
        escalated: (esc?.highestTierTold ?? 0) >= ESCALATION_TIER && esc?.acknowledgedBy === undefined,
        usualRateEndsWatch: word?.status === 202 && (watched?.state.startsWith('returned to normal') ?? false),
        webhooksVerified: files.webhooks.length > 0 && files.webhooks.every((w) => w.verified),
        settled,
        noFailedJobs: failedJobs.length === 0,
      },
      seconds: { feed: round1(feedSeconds), total: round1((Date.now() - started) / 1000) },
    };

    if (options.keepOpen) return { report, viewerToken: tokens.viewer, responderToken: tokens.responder, close: closeEverything };
    await closeEverything();
    return { report: { ...report, seconds: { ...report.seconds, total: round1((Date.now() - started) / 1000) } }, close: async () => {} };
  } catch (e) {
    await closeEverything();
    throw e;
  }
}

interface DemoWiring {
  readonly prefix: string;
  readonly smtpPort: number;
  readonly webhookUrl: string;
  readonly apiUrl: string;
}

/** The demo configuration with this run's receivers, API address and key prefix in place of the file's. */
export function demoConfig(config: Config, wiring: DemoWiring): Config {
  const channels = config.channels;
  if (channels.email === undefined || channels.ackLinks === undefined || channels.webhooks.length === 0) {
    throw new Error('the demo configuration needs channels.email, channels.webhooks and channels.ackLinks');
  }
  return {
    ...config,
    redis: { ...config.redis, prefix: wiring.prefix },
    channels: {
      ...channels,
      email: { ...channels.email, smtp: { ...channels.email.smtp, host: '127.0.0.1', port: wiring.smtpPort, secure: false } },
      webhooks: channels.webhooks.map((w) => ({ ...w, url: wiring.webhookUrl })),
      ackLinks: { ...channels.ackLinks, baseUrl: wiring.apiUrl },
    },
  };
}

async function feed(
  plan: FeedPlan,
  url: string,
  ingestToken: string,
  say: (line: string) => void,
  started: number,
  checkAborted: () => void,
): Promise<{ accepted: number; rejected: number }> {
  const t0 = Date.now();
  let next = 0;
  let accepted = 0;
  let rejected = 0;
  let quarter = 1;
  while (next < plan.results.length) {
    checkAborted();
    const elapsed = Date.now() - t0;
    const batch: unknown[] = [];
    while (next < plan.results.length && plan.results[next]!.atMs <= elapsed) batch.push(plan.results[next++]!.event);
    if (batch.length > 0) {
      const response = await fetch(url, { method: 'POST', headers: { 'content-type': 'application/json', authorization: `Bearer ${ingestToken}` }, body: JSON.stringify(batch) });
      const outcomes = (await response.json()) as { status: string; errors?: { path: string; reason: string }[] }[] | { message?: string };
      if (!Array.isArray(outcomes)) throw new Error(`POST /v1/results answered ${response.status}: ${outcomes.message ?? ''}`);
      for (const o of outcomes) {
        if (o.status === 'accepted') accepted++;
        else {
          rejected++;
          say(`  rejected: ${(o.errors ?? []).map((e) => `${e.path}: ${e.reason}`).join('; ')}`);
        }
      }
      const last = plan.results[next - 1]!.event;
      if (next >= (quarter * plan.results.length) / 4) {
        say(`  ${seconds(started)}  ${next} of ${plan.results.length} reports sent (lab date ${last.sampledAt.slice(0, 10)})`);
        quarter++;
      }
    }
    await sleep(50);
  }
  return { accepted, rejected };
}

/** Every result stored and evaluated, every notification delivered, and the demo's story played out. */
async function settle(args: { queues: Queue[]; store: RedisIncidents; settleMs: number; checkAborted: () => void; isDone: () => Promise<boolean> }): Promise<boolean> {
  const deadline = Date.now() + args.settleMs;
  while (Date.now() < deadline) {
    args.checkAborted();
    const counts = await Promise.all(args.queues.map((q) => q.getJobCounts('waiting', 'active', 'delayed', 'prioritized', 'waiting-children')));
    const busy = counts.some((c) => Object.values(c).some((n) => n > 0));
    const outbox = await args.store.outboxSize();
    if (!busy && outbox.waiting + outbox.claimed === 0) {
      if (await args.isDone()) return true;
      // A result or an evaluation that failed for good cannot come right by waiting.
      const failed = await Promise.all(args.queues.filter((q) => q.name !== QUEUE_NAMES.notify).map((q) => q.getJobCounts('failed')));
      if (failed.some((c) => (c['failed'] ?? 0) > 0)) return false;
    }
    await sleep(250);
  }
  return false;
}

async function readFailedJobs(queues: Queue[]): Promise<DemoReport['failedJobs'][number][]> {
  const failed = await Promise.all(
    queues.map(async (q) => {
      const count = (await q.getJobCounts('failed'))['failed'] ?? 0;
      const [first] = count > 0 ? await q.getFailed(0, 0) : [];
      return { queue: q.name, count, reason: first?.failedReason ?? '' };
    }),
  );
  return failed.filter((f) => f.count > 0);
}

async function storyDone(store: RedisIncidents): Promise<boolean> {
  const open = await store.list({ state: 'open', limit: 1000 });
  const ack = open.find((i) => i.unit === ACK_UNIT.unit && i.component === ACK_UNIT.component);
  const esc = open.find((i) => i.unit === ESCALATING_UNIT.unit && i.component === ESCALATING_UNIT.component);
  return ack?.acknowledged != null && esc !== undefined && esc.escalation.reachedTier >= ESCALATION_TIER;
}

async function readTimelines(storage: RedisStore, returnAfterSamples: number): Promise<ComponentTimeline[]> {
  const components = await storage.components();
  const order = (u: string, c: string) => {
    const story = DEMO_STORIES.findIndex((s) => s.unit === u && s.component === c);
    return story >= 0 ? String(story) : `9${u}/${c}`;
  };
  components.sort((a, b) => (order(a.unit, a.component) < order(b.unit, b.component) ? -1 : 1));
  return Promise.all(
    components.map(async (c) => {
      const [samples, steps] = await Promise.all([storage.revisions(c), storage.findings(c)]);
      return componentTimeline({ unit: c.unit, component: c.component, sampleDates: samples.map(({ sample: s }) => ({ sampleId: s.sampleId, sampledAt: s.sampledAt })), steps, returnAfterSamples });
    }),
  );
}

async function countFindings(storage: RedisStore): Promise<Record<RuleFamily, number>> {
  const counts = Object.fromEntries(RULE_FAMILIES.map((r) => [r, 0])) as Record<RuleFamily, number>;
  for (const c of await storage.components()) for (const step of await storage.findings(c)) for (const f of step.findings) counts[f.rule]++;
  return counts;
}

async function readIncidents(store: RedisIncidents): Promise<DemoIncident[]> {
  const list = await store.list({ state: 'all', limit: 1000 });
  const full = (await Promise.all(list.map((i) => store.get(i.id)))).filter((i): i is Incident => i !== undefined);
  return full.map((i) => {
    const notified = i.notifications;
    return {
      id: i.id,
      unit: i.unit,
      component: i.component,
      severity: i.peakSeverity,
      state: i.closed !== null ? `closed (${i.closed.how})` : `${i.alarm === 'active' ? 'active' : 'returned to normal'}, ${i.acknowledged ? 'acknowledged' : 'unacknowledged'}`,
      ...(i.acknowledged !== null && { acknowledgedBy: i.acknowledged.by }),
      reachedTier: i.escalation.reachedTier,
      highestTierTold: Math.max(-1, ...notified.filter((t) => t.targets.length > 0).map((t) => t.tier)),
      notifications: notified.reduce((n, t) => n + t.targets.length, 0),
    };
  });
}

function writeOut(
  dir: string,
  mails: readonly ReceivedMail[],
  hooks: readonly { seq: number; headers: unknown; rawBody: string; verified: boolean; type?: string }[],
): { mails: DemoReport['mails'][number][]; webhooks: DemoReport['webhooks'][number][] } {
  mkdirSync(dir, { recursive: true });
  // Only what an earlier demo run wrote is removed; anything else in the directory stays.
  for (const f of readdirSync(dir)) if (/^(mail-\d+.*\.eml|webhook-\d+.*\.json)$/.test(f)) rmSync(join(dir, f));
  const pad = (n: number) => String(n).padStart(3, '0');
  const slug = (s: string) => s.replace(/[^A-Za-z0-9.-]+/g, '-').slice(0, 60);
  const mailFiles = mails.map((m) => {
    const file = `mail-${pad(m.seq)}-${slug(m.to[0]?.split('@')[0] ?? 'unknown')}.eml`;
    writeFileSync(join(dir, file), m.raw);
    return { seq: m.seq, to: m.to.join(', '), subject: m.parsed.subject ?? '', file };
  });
  const hookFiles = hooks.map((h) => {
    const type = (h.type ?? 'unverified').replace(/^wearshift\.incident\./, '');
    const file = `webhook-${pad(h.seq)}-${slug(type)}.json`;
    writeFileSync(join(dir, file), `${JSON.stringify({ headers: h.headers, body: h.rawBody, verified: h.verified }, null, 2)}\n`);
    return { seq: h.seq, type: h.type ?? '(unverified)', verified: h.verified, file };
  });
  return { mails: mailFiles, webhooks: hookFiles };
}

async function deleteKeys(url: string, prefix: string, logger: Logger): Promise<void> {
  const conn = connectRedis(url, 'worker', logger);
  try {
    // The prefix is this run's own (random), so every key under it belongs to the demo.
    const pattern = `${prefix.replace(/[*?[\]\\]/g, '\\$&')}*`;
    let cursor = '0';
    do {
      const [nextCursor, keys] = await conn.scan(cursor, 'MATCH', pattern, 'COUNT', 500);
      cursor = nextCursor;
      if (keys.length > 0) await conn.unlink(...keys);
    } while (cursor !== '0');
  } finally {
    await conn.quit().catch(() => conn.disconnect());
  }
}

const sleep = (ms: number) => new Promise((resolve) => setTimeout(resolve, ms));
const round1 = (x: number) => Math.round(x * 10) / 10;
const seconds = (since: number) => `${((Date.now() - since) / 1000).toFixed(1).padStart(5)} s`;
