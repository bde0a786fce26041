/**
 * Closing the webhook channel, or the worker, while a delivery hangs on a receiver that does not answer (the
 * endpoint's timeout at its maximum, 5 minutes, far beyond every wait here): the request is aborted and its
 * connection closed at once, the delivery fails as retryable and possibly arrived, its job stays pending and is not
 * recorded as delivered, and the next worker delivers it once. Against a real HTTP receiver that verifies every
 * request with the reference Standard Webhooks verifier, and a private Redis. Every wait is for an event, bounded
 * generously.
 */
import { createServer, type IncomingMessage, type Server, type ServerResponse } from 'node:http';
import type { AddressInfo } from 'node:net';
import { randomBytes } from 'node:crypto';
import { Queue } from 'bullmq';
import { Webhook } from 'standardwebhooks';
import { afterAll, afterEach, beforeAll, describe, expect, it } from 'vitest';
import { DeliveryRetry } from '../../src/channels/errors.ts';
import { notificationChannels } from '../../src/channels/openChannels.ts';
import type { Config } from '../../src/domain/config.ts';
import { parseConfig } from '../../src/domain/configFile.ts';
import { WEBHOOK_TIMEOUT_MAX_MS } from '../../src/domain/escalationConfig.ts';
import type { NotifyEffect } from '../../src/incidents/model.ts';
import { incidentRules } from '../../src/incidents/policy.ts';
import { startWorkers, type RunningWorkers } from '../../src/queue/workers.ts';
import { DeliveryLedger } from '../../src/redis/deliveryLedger.ts';
import { RedisIncidents } from '../../src/redis/redisIncidents.ts';
import { silentLogger } from '../../src/telemetry/logger.ts';
import { startRedisServer, type RedisServer } from '../helpers/redisServer.ts';
import { incidentMessage } from '../unit/notify-fixtures.ts';
import { openIronAlarm } from '../helpers/ironAlarm.ts';
import { waitFor } from '../helpers/processes.ts';

/** How long a test waits for something that should happen within a few seconds. */
const BOUND_MS = 60_000;
const SECRET = `whsec_${randomBytes(32).toString('base64')}`;
const ENV = { CLOSE_TEST_WEBHOOK_SECRET: SECRET };

interface Receiver {
  readonly url: string;
  /** Verified requests, by webhook-id, in arrival order. */
  readonly requests: Array<{ id: string; type: string }>;
  /** Requests held unanswered right now. */
  readonly held: Set<ServerResponse>;
  /** Held requests whose sender closed the connection. */
  closedBySender(): number;
  /** Hang (at first): hold every request. Answer: answer every new one 204. */
  answerFromNowOn(): void;
  close(): Promise<void>;
}

async function receiver(): Promise<Receiver> {
  const verifier = new Webhook(SECRET);
  const requests: Receiver['requests'] = [];
  const held = new Set<ServerResponse>();
  let closedBySender = 0;
  let closing = false;
  let mode: 'hang' | 'answer' = 'hang';
  const handle = async (req: IncomingMessage, res: ServerResponse) => {
    const chunks: Buffer[] = [];
    for await (const c of req) chunks.push(c as Buffer);
    const body = Buffer.concat(chunks).toString('utf8');
    try {
      verifier.verify(body, Object.fromEntries(Object.entries(req.headers).map(([k, v]) => [k, String(v)])));
    } catch {
      res.writeHead(401).end();
      return;
    }
    requests.push({ id: String(req.headers['webhook-id']), type: (JSON.parse(body) as { type: string }).type });
    if (mode === 'answer') {
      res.writeHead(204).end();
      return;
    }
    held.add(res);
    res.on('close', () => {
      held.delete(res);
      if (!closing) closedBySender += 1;
    });
  };
  const server: Server = createServer((req, res) => void handle(req, res));
  await new Promise<void>((resolve) => server.listen(0, '127.0.0.1', () => resolve()));
  return {
    url: `http://127.0.0.1:${(server.address() as AddressInfo).port}/hooks`,
    requests,
    held,
    closedBySender: () => closedBySender,
    answerFromNowOn: () => {
      mode = 'answer';
    },
    async close() {
      closing = true;
      server.closeAllConnections();
      await new Promise<void>((resolve) => server.close(() => resolve()));
    },
  };
}

/** Polls every 50 ms until `probe` holds, failing with `what` after the test's bound. */
const until = (what: string, probe: () => boolean | Promise<boolean>): Promise<void> => waitFor(what, probe, BOUND_MS, 50);

/** Resolves with `done`'s value, or with 'still waiting' after `ms`. */
function within<T>(done: Promise<T>, ms: number): Promise<T | 'still waiting'> {
  let timer: NodeJS.Timeout | undefined;
  return Promise.race([done, new Promise<'still waiting'>((r) => (timer = setTimeout(() => r('still waiting'), ms)))]).finally(() => clearTimeout(timer));
}

function config(prefix: string, url: string): Config {
  return parseConfig(`
redis: { prefix: "${prefix}" }
escalation:
  policies:
    - name: alarms
      tiers:
        - { afterMinutes: 0, webhooks: [control-room] }
channels:
  webhooks:
    - { name: control-room, url: "${url}", secrets: [CLOSE_TEST_WEBHOOK_SECRET], timeoutMs: ${WEBHOOK_TIMEOUT_MAX_MS} }
`);
}

let redis: RedisServer;
let hooks: Receiver | undefined;
let running: RunningWorkers | undefined;

beforeAll(async () => {
  redis = await startRedisServer();
});

afterEach(async () => {
  await hooks?.close();
  await running?.close();
  hooks = running = undefined;
});

afterAll(async () => {
  await redis?.dispose();
});

describe('closing while a webhook delivery hangs on a receiver that does not answer', () => {
  it('the channel’s close aborts the request at once, retryable and possibly arrived; later deliveries are refused for a retry without a request', async () => {
    hooks = await receiver();
    const cfg = config('{webhook-close-channel}', hooks.url);
    const channels = notificationChannels(cfg.channels, { logger: silentLogger(), env: ENV });
    const delivery = { effect: { channel: 'webhook', target: 'control-room', incidentId: 'INC-2026-0011', at: '2026-03-02T08:00:00.000Z' } as NotifyEffect, message: incidentMessage(), attempt: 1 };
    const outcome = channels.deliver(delivery).then(
      () => 'sent',
      (e: unknown) => e,
    );
    await until('the request held by the receiver', () => hooks!.held.size === 1);

    // Without the abort, the close would leave the request to its 5-minute timeout.
    expect(await within(channels.close().then(() => 'closed'), BOUND_MS)).toBe('closed');
    const error = await within(outcome, BOUND_MS);
    expect(error).toBeInstanceOf(DeliveryRetry);
    expect((error as DeliveryRetry).message).toMatch(/webhook control-room: no response: the webhook channel closed .*request aborted/);
    // The request went out: it may have reached the receiver.
    expect((error as DeliveryRetry).notTaken).toBe(false);
    await until('the sender closing the held connection', () => hooks!.closedBySender() === 1);
    expect(hooks.held.size).toBe(0);

    const after = await channels.deliver(delivery).then(
      () => 'sent',
      (e: unknown) => e,
    );
    expect(after).toBeInstanceOf(DeliveryRetry);
    expect((after as DeliveryRetry).notTaken).toBe(true);
    expect(hooks.requests).toHaveLength(1);
  });

  it('the worker’s close returns long before the timeout, the job left pending for a retry that the next worker delivers once', async () => {
    const prefix = '{webhook-close-worker}';
    hooks = await receiver();
    const connection = redis.client();
    const cfg = config(prefix, hooks.url);
    const incidents = new RedisIncidents(connection, { rules: incidentRules(cfg), prefix });
    running = startWorkers({ connection, config: cfg, logger: silentLogger(), channels: notificationChannels(cfg.channels, { logger: silentLogger(), env: ENV }) }, { prefix, outboxIntervalMs: 200 });
    await openIronAlarm(incidents, 'PS9-P1');
    await until('the delivery held by the receiver', () => hooks!.held.size === 1);

    // Without the channel ending the request, the close would wait for the job, up to the 5-minute timeout.
    expect(await within(running.close().then(() => 'closed'), BOUND_MS)).toBe('closed');
    running = undefined;
    await until('the sender closing the held connection', () => hooks!.closedBySender() === 1);

    const notify = new Queue('notify', { connection, prefix });
    const ledger = new DeliveryLedger(connection, prefix);
    try {
      const jobs = await notify.getJobs(['active', 'waiting', 'delayed', 'prioritized', 'completed', 'failed']);
      expect(jobs).toHaveLength(1);
      const job = jobs[0]!;
      const effect = job.data as NotifyEffect;
      // Pending for a retry with backoff, not done and not given up.
      expect(await job.getState()).toBe('delayed');
      expect(job.attemptsMade).toBe(1);
      expect(job.failedReason).toMatch(/the webhook channel closed/);
      expect(await notify.getCompletedCount()).toBe(0);
      expect(await notify.getFailedCount()).toBe(0);
      expect(await ledger.delivered(effect.key)).toBe(false);
      // The attempt stays noted as possibly arrived.
      expect(await ledger.attempted(effect.key)).toEqual(expect.any(Number));

      // The next worker, with a receiver that answers, delivers it once, under the same webhook-id.
      hooks.answerFromNowOn();
      await job.promote();
      running = startWorkers({ connection, config: cfg, logger: silentLogger(), channels: notificationChannels(cfg.channels, { logger: silentLogger(), env: ENV }) }, { prefix, outboxIntervalMs: 200 });
      await until('the retried delivery recorded as delivered', () => ledger.delivered(effect.key));
      await until('the job completed', async () => (await notify.getCompletedCount()) === 1);
      expect(hooks.requests).toHaveLength(2);
      expect(hooks.requests[1]!.id).toBe(hooks.requests[0]!.id);
      expect(hooks.requests[1]!.type).toBe('wearshift.incident.opened');
      expect(hooks.closedBySender()).toBe(1);
    } finally {
      await notify.close();
    }
  });
});
