/**
 * One fault scenario: a private redis-server, a configuration file naming the mail and webhook receivers,
 * the environment a `wearshift worker` child needs, and the checks every scenario ends with — each result
 * stored once, each notification the incident timelines record delivered once per channel.
 */
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import type { Queue } from 'bullmq';
import type { Redis } from 'ioredis';
import { parseConfig } from '../../src/domain/configFile.ts';
import type { Config } from '../../src/domain/config.ts';
import type { ResultEvent } from '../../src/domain/event.ts';
import type { Incident } from '../../src/incidents/model.ts';
import { incidentRules } from '../../src/incidents/policy.ts';
import { RedisIncidents as RedisIncidentStore } from '../../src/redis/redisIncidents.ts';
import { openQueue, QUEUE_NAMES, resolveQueueSettings } from '../../src/queue/queues.ts';
import { RedisStore } from '../../src/redis/redisStore.ts';
import { startRedisServer, type RedisServer } from '../helpers/redisServer.ts';
import { FLEET_CONFIG } from '../helpers/fleetCsv.ts';
import { waitFor } from '../helpers/processes.ts';

export const PREFIX = '{faults}';
export const ONCALL = 'oncall@plant.example';
export const WEBHOOK = 'control-room';

export interface ScenarioOptions {
  smtpPort?: number;
  webhookUrl?: string;
  webhookTimeoutMs?: number;
  appendOnly?: boolean;
}

export interface Scenario {
  readonly redis: RedisServer;
  /** A client of the private Redis that waits through an outage. */
  readonly client: Redis;
  readonly config: Config;
  readonly storage: RedisStore;
  readonly incidents: RedisIncidentStore;
  readonly queues: Record<keyof typeof QUEUE_NAMES, Queue>;
  /** Environment of a worker child, with the webhook secret under WEBHOOK_SECRET. */
  env(webhookSecret?: string): Record<string, string>;
  dispose(): Promise<void>;
}

/**
 * FLEET_CONFIG's limits (tests/helpers/fleetCsv.ts), every incident told at once by e-mail and webhook, and
 * backfilled findings paging like live ones so that the old simulated dates still notify.
 */
export function scenarioConfig(options: ScenarioOptions): string {
  const notifies = options.smtpPort !== undefined || options.webhookUrl !== undefined;
  return `
redis: { prefix: "${PREFIX}" }
backfill: { quietAfterDays: 36500 }
${FLEET_CONFIG}
${notifies ? notifying(options) : ''}`;
}

function notifying(options: ScenarioOptions): string {
  const email = options.smtpPort !== undefined;
  const webhook = options.webhookUrl !== undefined;
  return `escalation:
  policies:
    - name: control-room
      tiers:
        - afterMinutes: 0
${email ? `          email: [${ONCALL}]\n` : ''}${webhook ? `          webhooks: [${WEBHOOK}]\n` : ''}channels:
  # Every message counts here, so none is held back by alarm-flood control (tested in tests/abuse/alarm-flood.test.ts).
  floodControl: { maxMessages: 100000, windowMinutes: 10 }
${email ? `  email: { from: "wearshift <alerts@plant.example>", smtp: { host: 127.0.0.1, port: ${options.smtpPort} } }\n` : ''}${
    webhook ? `  webhooks:\n    - { name: ${WEBHOOK}, url: "${options.webhookUrl}", secrets: [WEBHOOK_SECRET], timeoutMs: ${options.webhookTimeoutMs ?? 5000} }\n` : ''
  }`;
}

export async function startScenario(options: ScenarioOptions): Promise<Scenario> {
  const redis = await startRedisServer({ appendOnly: options.appendOnly ?? false });
  const dir = mkdtempSync(join(tmpdir(), 'wearshift-faults-'));
  const text = scenarioConfig(options);
  const config = parseConfig(text);
  const configFile = join(dir, 'config.yaml');
  writeFileSync(configFile, text);
  const client = redis.client();
  const settings = resolveQueueSettings({ prefix: PREFIX });
  const queues = {
    results: openQueue(QUEUE_NAMES.results, client, settings),
    history: openQueue(QUEUE_NAMES.history, client, settings),
    evaluate: openQueue(QUEUE_NAMES.evaluate, client, settings),
    notify: openQueue(QUEUE_NAMES.notify, client, settings),
    escalate: openQueue(QUEUE_NAMES.escalate, client, settings),
  };
  return {
    redis,
    client,
    config,
    storage: new RedisStore(client, { prefix: PREFIX, config }),
    incidents: new RedisIncidentStore(client, { rules: incidentRules(config), prefix: PREFIX }),
    queues,
    env: (webhookSecret) => ({ REDIS_URL: redis.url, WEARSHIFT_CONFIG: configFile, ...(webhookSecret !== undefined && { WEBHOOK_SECRET: webhookSecret }) }),
    async dispose() {
      await Promise.all(Object.values(queues).map((q) => q.close()));
      await redis.dispose();
      rmSync(dir, { recursive: true, force: true });
    },
  };
}

/** Results stored so far, over every component. */
export async function storedCount(s: Scenario): Promise<number> {
  return (await s.storage.components()).reduce((n, c) => n + c.samples, 0);
}

/** Waits until every result is stored, no job waits or runs and the incident outbox is empty. */
export async function settled(s: Scenario, expectedResults: number, timeoutMs: number): Promise<void> {
  const busy = ['waiting', 'active', 'delayed', 'prioritized'] as const;
  let quiet = 0;
  let last = '';
  await waitFor(
    () => `all ${expectedResults} results stored and the results, history, evaluate and notify queues idle (last seen: ${last})`,
    async () => {
      const [stored, counts, outbox] = await Promise.all([
        storedCount(s),
        Promise.all([s.queues.results, s.queues.evaluate, s.queues.notify, s.queues.history].map((q) => q.getJobCounts(...busy))),
        s.incidents.outboxSize(),
      ]);
      last = JSON.stringify({ stored, results: counts[0], evaluate: counts[1], notify: counts[2], history: counts[3], outbox });
      const idle = stored >= expectedResults && counts.every((c) => Object.values(c).every((n) => n === 0)) && outbox.waiting + outbox.claimed === 0;
      quiet = idle ? quiet + 1 : 0;
      // Twice a second apart: an evaluation may add notifications just after the queues looked idle.
      return quiet >= 3;
    },
    timeoutMs,
    500,
  );
}

/** Every incident in the store, with its timeline. */
export async function allIncidents(s: Scenario): Promise<Incident[]> {
  const summaries = await s.incidents.list({ state: 'all', limit: 1000 });
  return (await Promise.all(summaries.map((i) => s.incidents.get(i.id)))).filter((i): i is Incident => i !== undefined);
}

export interface ToldOnce {
  /** `incidentId:eventSeq:channel:tier:target` of every message the timelines say went out. */
  readonly keys: string[];
  readonly byChannel: { email: string[]; webhook: string[] };
  /**
   * Messages the timelines say were held back after an attempt had begun (`withdrawn[].attemptedAt`): they may have
   * reached their target then, or not. Held back before any attempt, a message is not sent, and counted nowhere.
   */
  readonly mayHaveArrived: { email: string[]; webhook: string[] };
}

/** The notifications the incidents record (the effect keys, which are the messages' idempotency keys). */
export function recordedNotifications(incidents: readonly Incident[]): ToldOnce {
  const keys: string[] = [];
  const uncertain: string[] = [];
  for (const inc of incidents) {
    for (const entry of inc.notifications) {
      const heldBack = new Map((entry.withdrawn ?? []).map((w) => [w.target, w]));
      for (const target of entry.targets) {
        const [channel, ...rest] = target.split(':');
        const key = `${inc.id}:${entry.eventSeq}:${channel}:${entry.tier}:${rest.join(':')}`;
        const held = heldBack.get(target);
        if (held === undefined) keys.push(key);
        else if (held.attemptedAt !== undefined) uncertain.push(key);
      }
    }
  }
  const byChannel = (list: string[]) => ({ email: list.filter((k) => k.includes(':email:')), webhook: list.filter((k) => k.includes(':webhook:')) });
  return { keys, byChannel: byChannel(keys), mayHaveArrived: byChannel(uncertain) };
}

/**
 * The effect key a `webhook-id` stands for: the id is the key percent-encoded, or a digest when that would
 * exceed the 255 characters a header allows (then it cannot be read back and is returned as it is).
 */
export function effectKeyOf(webhookId: string): string {
  return webhookId.startsWith('sha256-') ? webhookId : decodeURIComponent(webhookId);
}

/** Per component: stored sample ids and revision count against what was sent. */
export async function storageAgainst(s: Scenario, sent: readonly ResultEvent[]): Promise<{ component: string; sent: number; stored: number; revisions: number; registry: number }[]> {
  const byComponent = new Map<string, Set<string>>();
  for (const e of sent) {
    const key = `${e.unit}/${e.component}`;
    if (!byComponent.has(key)) byComponent.set(key, new Set());
    byComponent.get(key)!.add(e.sampleId);
  }
  const out = [];
  for (const c of await s.storage.components()) {
    const key = `${c.unit}/${c.component}`;
    const revisions = await s.storage.revisions(c);
    out.push({ component: key, sent: byComponent.get(key)?.size ?? 0, stored: new Set(revisions.map((r) => r.sample.sampleId)).size, revisions: revisions.length, registry: c.samples });
  }
  return out.sort((a, b) => (a.component < b.component ? -1 : 1));
}
