/**
 * A notification whose worker dies twice while delivering it. The webhook receiver hangs (the sender's timeout is 2
 * minutes, as a slow receiver may be given): worker w1 takes the four messages and dies; w2 takes them over once
 * their locks have lapsed, they hang again, and w2 dies too; the receiver answers again and w3 takes them over.
 * Each message reaches the receiver answered once, the incidents record them, and no notify job is failed: a
 * take-over is no failed attempt, and the messages had most of their attempts left. (BullMQ's own limit fails a
 * job at its second take-over, "job stalled more than allowable limit".)
 *
 * A worker dies here as a process killed with SIGKILL would: its BullMQ workers are closed by force, so they
 * neither renew their jobs' locks nor finish a job, and its requests stay unanswered. Locks last 4 s and are
 * looked at every second, so that a take-over comes within seconds; every wait is for an event, bounded generously.
 */
import { createServer, type IncomingMessage, type Server, type ServerResponse } from 'node:http';
import type { AddressInfo } from 'node:net';
import { Queue } from 'bullmq';
import { Webhook } from 'standardwebhooks';
import { afterEach, describe, expect, it } from 'vitest';
import { notificationChannels } from '../../src/channels/openChannels.ts';
import { parseConfig } from '../../src/domain/configFile.ts';
import type { NotifyEffect } from '../../src/incidents/model.ts';
import { incidentRules } from '../../src/incidents/policy.ts';
import { startWorkers, type RunningWorkers } from '../../src/queue/workers.ts';
import { DeliveryLedger } from '../../src/redis/deliveryLedger.ts';
import { RedisIncidents } from '../../src/redis/redisIncidents.ts';
import { silentLogger } from '../../src/telemetry/logger.ts';
import { startRedisServer, type RedisServer } from '../helpers/redisServer.ts';
import { webhookSecret } from './peers.ts';
import { effectKeyOf, recordedNotifications } from './scenario.ts';
import { openIronAlarm } from '../helpers/ironAlarm.ts';
import { waitFor } from '../helpers/processes.ts';

const PREFIX = '{double-stall}';
const UNITS = ['PS8-P1', 'PS8-P2', 'PS8-P3', 'PS8-P4'];
/** How long a test waits for something that should happen within seconds. */
const BOUND_MS = 90_000;

interface Request {
  readonly id: string;
  readonly verified: boolean;
  /** 'held' while unanswered, 'sender-gone' once its sender hung up, else the status written. */
  answer: 'held' | 'sender-gone' | number;
}

interface Receiver {
  readonly url: string;
  readonly secret: string;
  readonly requests: Request[];
  /** Hang (at first): every request is held unanswered. Answer: every new request is answered 204 (held ones stay held). */
  answerFromNowOn(): void;
  held(): number;
  close(): Promise<void>;
}

/** A webhook receiver that verifies every request with the reference Standard Webhooks verifier and de-duplicates nothing. */
async function receiver(): Promise<Receiver> {
  const secret = webhookSecret();
  const verifier = new Webhook(secret);
  const requests: Request[] = [];
  let mode: 'hang' | 'answer' = 'hang';
  const handle = async (req: IncomingMessage, res: ServerResponse) => {
    const chunks: Buffer[] = [];
    for await (const c of req) chunks.push(c as Buffer);
    const headers = Object.fromEntries(Object.entries(req.headers).map(([k, v]) => [k, String(v)]));
    let verified = true;
    try {
      verifier.verify(Buffer.concat(chunks).toString('utf8'), headers);
    } catch {
      verified = false;
    }
    const request: Request = { id: headers['webhook-id'] ?? '', verified, answer: 'held' };
    requests.push(request);
    if (verified && mode === 'hang') {
      res.on('close', () => {
        if (request.answer === 'held') request.answer = 'sender-gone';
      });
      return;
    }
    request.answer = verified ? 204 : 401;
    res.writeHead(request.answer).end();
  };
  const server: Server = createServer((req, res) => void handle(req, res));
  await new Promise<void>((resolve) => server.listen(0, '127.0.0.1', () => resolve()));
  return {
    url: `http://127.0.0.1:${(server.address() as AddressInfo).port}/hooks`,
    secret,
    requests,
    answerFromNowOn: () => {
      mode = 'answer';
    },
    held: () => requests.filter((q) => q.answer === 'held').length,
    async close() {
      server.closeAllConnections();
      await new Promise<void>((resolve) => server.close(() => resolve()));
    },
  };
}

/** Polls every 50 ms until `probe` holds, failing with `what` after the test's bound. */
const until = (what: string, probe: () => boolean | Promise<boolean>): Promise<void> => waitFor(what, probe, BOUND_MS, 50);

let redis: RedisServer | undefined;
let hooks: Receiver | undefined;
const started: RunningWorkers[] = [];

afterEach(async () => {
  // Closing a killed worker ends what it left behind: its channel ends its requests still held, its relay stops.
  await Promise.all(started.splice(0).map((w) => w.close()));
  await hooks?.close();
  await redis?.dispose();
  hooks = redis = undefined;
});

describe('a notification whose worker dies twice while delivering it', () => {
  it('is delivered once by the third worker, not failed', async () => {
    redis = await startRedisServer();
    hooks = await receiver();
    const config = parseConfig(`
redis: { prefix: "${PREFIX}" }
escalation:
  policies:
    - name: alarms
      tiers:
        - { afterMinutes: 0, webhooks: [control-room] }
channels:
  floodControl: { maxMessages: 100000, windowMinutes: 10 }
  webhooks:
    - { name: control-room, url: "${hooks.url}", secrets: [STALL_TEST_WEBHOOK_SECRET], timeoutMs: 120000 }
`);
    const env = { STALL_TEST_WEBHOOK_SECRET: hooks.secret };
    const client = redis.client();
    const incidents = new RedisIncidents(client, { rules: incidentRules(config), prefix: PREFIX });
    const notify = new Queue('notify', { connection: client, prefix: PREFIX });
    const worker = () => {
      const w = startWorkers(
        { connection: redis!.client(), config, logger: silentLogger(), channels: notificationChannels(config.channels, { logger: silentLogger(), env }) },
        // Slots for every message at once, so that each worker holds all four; the attempts as by default (20).
        { prefix: PREFIX, outboxIntervalMs: 200, notifyConcurrency: UNITS.length, jobLockMs: 4000, stalledCheckMs: 1000 },
      );
      started.push(w);
      return w;
    };
    /** Closes its BullMQ workers by force, as SIGKILL would end them: no lock renewed, no job finished. */
    const kill = async (w: RunningWorkers) => {
      await Promise.all(w.workers.map((x) => x.close(true)));
    };
    const attemptsOf = (id: string) => hooks!.requests.filter((q) => q.id === id).length;
    try {
      const w1 = worker();
      for (const unit of UNITS) await openIronAlarm(incidents, unit);
      await until('w1 holding the four messages at the hanging receiver', () => hooks!.held() === UNITS.length);
      const ids = [...new Set(hooks.requests.map((q) => q.id))];
      expect(ids).toHaveLength(UNITS.length);
      expect(await notify.getActiveCount()).toBe(UNITS.length);
      await kill(w1);

      const w2 = worker();
      await until('w2 taking the four messages over and holding them too', () => ids.every((id) => attemptsOf(id) === 2) && hooks!.held() === 2 * UNITS.length);
      expect((await notify.getJobs(['active'])).map((j) => j.stalledCounter)).toEqual(UNITS.map(() => 1));
      await kill(w2);

      hooks.answerFromNowOn();
      worker();
      await until('the four notify jobs finished (completed or failed)', async () => (await notify.getCompletedCount()) + (await notify.getFailedCount()) === UNITS.length);

      const failed = await notify.getFailed();
      expect(failed.map((j) => j.failedReason)).toEqual([]);
      const completed = await notify.getCompleted();
      expect(completed).toHaveLength(UNITS.length);
      // Each was taken over twice, and neither take-over counted as a failed attempt.
      expect(completed.map((j) => j.stalledCounter)).toEqual(UNITS.map(() => 2));

      // Each message answered 2xx exactly once, on its third request; the two before it were never answered.
      const answered = hooks.requests.filter((q) => typeof q.answer === 'number');
      expect(answered.every((q) => q.verified && q.answer === 204)).toBe(true);
      expect(answered.map((q) => q.id).sort()).toEqual([...ids].sort());
      expect(ids.map(attemptsOf)).toEqual(UNITS.map(() => 3));
      // The incidents record exactly these four messages.
      const summaries = await incidents.list({ state: 'all', limit: 100 });
      const told = recordedNotifications(await Promise.all(summaries.map(async (s) => (await incidents.get(s.id))!)));
      expect(ids.map(effectKeyOf).sort()).toEqual([...told.byChannel.webhook].sort());
      const ledger = new DeliveryLedger(client, PREFIX);
      for (const job of completed) expect(await ledger.delivered((job.data as NotifyEffect).key)).toBe(true);
    } finally {
      await notify.close();
    }
  });
});
