/**
 * An SMTP server that trickles its reply (greets, then answers EHLO one byte at a time with pauses) resets the idle
 * timeouts with every byte: without a deadline of its own, an e-mail attempt to it never ends. Against a real
 * trickling server (a net server written here) and a private Redis:
 * - the attempt ends at its deadline (`channels.email.smtp.deadlineMs`, here 2 s) with a retryable error, the
 *   connection is closed, and the live worker schedules the retry, the attempt noted as possibly arrived;
 * - while every e-mail slot hangs on that server (deadline 10 minutes), a webhook to a real HTTP receiver is still
 *   delivered: each channel kind has its own share of the notify slots;
 * - closing the channel, or the worker, while an attempt hangs there (deadline 10 minutes) ends the attempt at once:
 *   its job stays pending for a retry, not recorded as delivered, and the next worker delivers it once.
 * Nothing here depends on speed: every wait is for an event, bounded generously.
 */
import { randomBytes } from 'node:crypto';
import { createServer as createHttpServer, type Server as HttpServer } from 'node:http';
import { createServer, type AddressInfo, type Server, type Socket } from 'node:net';
import { Queue } from 'bullmq';
import { Webhook } from 'standardwebhooks';
import { afterAll, afterEach, beforeAll, describe, expect, it } from 'vitest';
import type { Step } from '../../src/analysis/model.ts';
import { renderIncidentEmail } from '../../src/channels/email/emailRender.ts';
import { EmailDeliveryError, sendEmail } from '../../src/channels/email/emailSend.ts';
import { DeliveryRetry } from '../../src/channels/errors.ts';
import { startMailReceiver, type MailReceiver } from '../../src/demo/mailReceiver.ts';
import { notificationChannels } from '../../src/channels/openChannels.ts';
import type { Config } from '../../src/domain/config.ts';
import { parseConfig } from '../../src/domain/configFile.ts';
import type { NotifyEffect } from '../../src/incidents/model.ts';
import { incidentRules } from '../../src/incidents/policy.ts';
import { startWorkers, type RunningWorkers } from '../../src/queue/workers.ts';
import { DeliveryLedger } from '../../src/redis/deliveryLedger.ts';
import { RedisIncidents } from '../../src/redis/redisIncidents.ts';
import { silentLogger } from '../../src/telemetry/logger.ts';
import { startRedisServer, type RedisServer } from '../helpers/redisServer.ts';
import { incidentMessage } from '../unit/notify-fixtures.ts';
import { waitFor } from '../helpers/processes.ts';

/** Pause between the bytes of the endless EHLO reply: far below every idle timeout (10 s greeting, 30 s socket). */
const TRICKLE_PAUSE_MS = 500;
/** How long a test waits for something that should happen within a few seconds. */
const BOUND_MS = 60_000;
/** The attempt's deadline where a test closes the channel: far beyond every wait of the test. */
const LONG_DEADLINE_MS = 600_000;

interface TrickleSmtp {
  readonly port: number;
  /** Connections that sent EHLO and are being answered a byte at a time. */
  readonly trickling: Set<Socket>;
  /** Most connections trickled to at once. */
  readonly mostAtOnce: () => number;
  readonly connections: () => number;
  /** Connections the client closed (its end or a reset). */
  readonly closedByClient: () => number;
  close(): Promise<void>;
}

/** Greets like an SMTP server, then answers EHLO with a "250-" line that never ends, one byte per pause. */
async function trickleSmtp(): Promise<TrickleSmtp> {
  const trickling = new Set<Socket>();
  const all = new Set<Socket>();
  let most = 0;
  let connections = 0;
  let closedByClient = 0;
  let closing = false;
  const server: Server = createServer((socket) => {
    connections += 1;
    all.add(socket);
    socket.on('error', () => {});
    socket.write('220 trickle.example ESMTP\r\n');
    let timer: NodeJS.Timeout | undefined;
    socket.once('data', () => {
      socket.write('250-');
      trickling.add(socket);
      most = Math.max(most, trickling.size);
      timer = setInterval(() => socket.write('a'), TRICKLE_PAUSE_MS);
    });
    socket.on('close', () => {
      clearInterval(timer);
      trickling.delete(socket);
      all.delete(socket);
      if (!closing) closedByClient += 1;
    });
  });
  await new Promise<void>((resolve) => server.listen(0, '127.0.0.1', () => resolve()));
  return {
    port: (server.address() as AddressInfo).port,
    trickling,
    mostAtOnce: () => most,
    connections: () => connections,
    closedByClient: () => closedByClient,
    async close() {
      closing = true;
      for (const s of all) s.destroy();
      await new Promise<void>((resolve) => server.close(() => resolve()));
    },
  };
}

/** Polls every 50 ms until `probe` holds, failing with `what` after the test's bound. */
const until = (what: string, probe: () => boolean | Promise<boolean>): Promise<void> => waitFor(what, probe, BOUND_MS, 50);

function finding(unit: string, severity: 'alarm' | 'caution', sampledAt: string): Step['findings'][number] {
  const [value, threshold] = severity === 'alarm' ? [95, 80] : [55, 40];
  return {
    unit,
    component: 'gearbox',
    group: 'gearboxes',
    measurand: 'Fe',
    rule: 'limit',
    disposition: 'incident',
    severity,
    value,
    threshold,
    basis: 'reading',
    sampleId: `${unit}-1`,
    sampledAt,
    explanation: `Fe ${value} ppm is above the ${severity} level of ${threshold} ppm.`,
  };
}

/** Opens an iron incident on the unit's gearbox; the worker's outbox relay queues its messages. */
async function openIncident(incidents: RedisIncidents, unit: string, severity: 'alarm' | 'caution'): Promise<void> {
  const sampledAt = new Date(Date.now() - 86_400_000).toISOString();
  await incidents.applySteps({ unit, component: 'gearbox' }, [{ sampleId: `${unit}-1`, sampledAt, findings: [finding(unit, severity, sampledAt)] }], {
    group: 'gearboxes',
    now: new Date(),
    quietBefore: new Date(0),
  });
}

function config(prefix: string, smtpPort: number, deadlineMs: number, alarmEmails: readonly string[], webhookUrl?: string): Config {
  return parseConfig(`
redis: { prefix: "${prefix}" }
escalation:
  policies:
    - name: alarms
      match: { severities: [alarm] }
      tiers:
        - { afterMinutes: 0, email: [${alarmEmails.join(', ')}] }
${
  webhookUrl === undefined
    ? ''
    : `    - name: cautions
      match: { severities: [caution] }
      tiers:
        - { afterMinutes: 0, webhooks: [control-room] }`
}
channels:
  email:
    from: "wearshift <alerts@plant.example>"
    smtp: { host: 127.0.0.1, port: ${smtpPort}, secure: false, deadlineMs: ${deadlineMs} }
${webhookUrl === undefined ? '' : `  webhooks:\n    - { name: control-room, url: "${webhookUrl}", secrets: [DEADLINE_TEST_WEBHOOK_SECRET] }`}
`);
}

let redis: RedisServer;
let smtp: TrickleSmtp | undefined;
let running: RunningWorkers | undefined;

beforeAll(async () => {
  redis = await startRedisServer();
});

afterEach(async () => {
  // The trickling server goes first: its closed connections end the attempts the worker still waits on.
  await smtp?.close();
  await running?.close();
  smtp = running = undefined;
});

afterAll(async () => {
  await redis?.dispose();
});

describe('an e-mail to an SMTP server that trickles its reply', () => {
  it('ends at the attempt’s deadline with a retryable error that does not claim the message was not taken, and closes the connection', async () => {
    smtp = await trickleSmtp();
    const rendered = renderIncidentEmail(incidentMessage(), { from: 'wearshift <alerts@plant.example>', to: 'oncall@plant.example' });
    const outcome = sendEmail({ host: '127.0.0.1', port: smtp.port, secure: false, ignoreTLS: true }, rendered, { deadlineMs: 2000 }).then(
      () => 'sent',
      (e: unknown) => e,
    );
    const error = await Promise.race([outcome, new Promise((r) => setTimeout(() => r('still sending'), BOUND_MS))]);
    expect(error).toBeInstanceOf(EmailDeliveryError);
    const e = error as EmailDeliveryError;
    expect(e.code).toBe('EDEADLINE');
    expect(e.retryable).toBe(true);
    // The data might have gone out (not here, but the error cannot tell): the attempt may have arrived.
    expect(e.notTaken).toBe(false);
    // The server got its EHLO and was trickling when the deadline ended it; then our side closed the connection.
    expect(smtp.connections()).toBe(1);
    await until('the client closing the trickled connection', () => smtp!.closedByClient() === 1);
    expect(smtp.trickling.size).toBe(0);
  });

  it('fails the live worker’s job for a retry with backoff, the attempt noted as possibly arrived', async () => {
    const prefix = '{deadline-retry}';
    smtp = await trickleSmtp();
    const cfg = config(prefix, smtp.port, 2000, ['oncall@plant.example']);
    const connection = redis.client();
    const incidents = new RedisIncidents(connection, { rules: incidentRules(cfg), prefix });
    running = startWorkers(
      { connection, config: cfg, logger: silentLogger(), channels: notificationChannels(cfg.channels, { logger: silentLogger(), env: {} }), apiBaseUrl: 'https://wearshift.plant.example' },
      { prefix, outboxIntervalMs: 200 },
    );
    await openIncident(incidents, 'PS7-P1', 'alarm');
    const notify = new Queue('notify', { connection, prefix });
    try {
      let job: Awaited<ReturnType<Queue['getDelayed']>>[number] | undefined;
      await until('the e-mail job waiting for its retry after a failed attempt', async () => {
        job = (await notify.getDelayed()).find((j) => j.attemptsMade >= 1);
        return job !== undefined;
      });
      expect(job!.failedReason).toMatch(/EDEADLINE.*deadline of 2000 ms/);
      expect(await notify.getFailedCount()).toBe(0);
      expect(await notify.getCompletedCount()).toBe(0);
      // The attempt stays noted: were the incident acknowledged now, its record would say the e-mail may have arrived.
      const effect = job!.data as NotifyEffect;
      expect(await new DeliveryLedger(connection, prefix).attempted(effect.key)).toEqual(expect.any(Number));
      await until('the worker closing the trickled connection', () => smtp!.closedByClient() >= 1);
    } finally {
      await notify.close();
    }
  });
});

describe('a stuck e-mail channel', () => {
  const SECRET = `whsec_${randomBytes(32).toString('base64')}`;
  let receiver: HttpServer;
  const hooks: Array<{ type: string; verified: boolean }> = [];

  beforeAll(async () => {
    const verifier = new Webhook(SECRET);
    receiver = createHttpServer((req, res) => {
      const chunks: Buffer[] = [];
      req.on('data', (c: Buffer) => chunks.push(c));
      req.on('end', () => {
        const body = Buffer.concat(chunks).toString('utf8');
        let verified = true;
        try {
          verifier.verify(body, req.headers as Record<string, string>);
        } catch {
          verified = false;
        }
        hooks.push({ type: (JSON.parse(body) as { type: string }).type, verified });
        res.writeHead(verified ? 204 : 401).end();
      });
    });
    await new Promise<void>((resolve) => receiver.listen(0, '127.0.0.1', () => resolve()));
  });

  afterAll(async () => {
    receiver.closeAllConnections();
    await new Promise<void>((resolve) => receiver.close(() => resolve()));
  });

  it('does not hold the webhooks: a webhook is delivered while every e-mail slot hangs on a trickling server', async () => {
    const prefix = '{deadline-share}';
    const SLOTS = 2;
    smtp = await trickleSmtp();
    // A deadline far beyond the test's wait: the e-mails stay stuck for as long as the test looks.
    const cfg = config(prefix, smtp.port, 600_000, ['a1@plant.example', 'a2@plant.example', 'a3@plant.example'], `http://127.0.0.1:${(receiver.address() as AddressInfo).port}/hooks`);
    const connection = redis.client();
    const incidents = new RedisIncidents(connection, { rules: incidentRules(cfg), prefix });
    const channels = notificationChannels(cfg.channels, { logger: silentLogger(), env: { DEADLINE_TEST_WEBHOOK_SECRET: SECRET } });
    running = startWorkers({ connection, config: cfg, logger: silentLogger(), channels, apiBaseUrl: 'https://wearshift.plant.example' }, { prefix, outboxIntervalMs: 200, notifyConcurrency: SLOTS });

    // Three e-mails queued first; the e-mail channel's slots all hang on the trickling server.
    await openIncident(incidents, 'PS7-P2', 'alarm');
    await until(`${SLOTS} e-mail attempts hanging on the trickling server`, () => smtp!.trickling.size === SLOTS);
    // Then a webhook message, queued behind them.
    await openIncident(incidents, 'PS7-P3', 'caution');
    await until('the webhook', () => hooks.some((h) => h.type === 'wearshift.incident.opened'));
    expect(hooks.every((h) => h.verified)).toBe(true);

    // The e-mails are still stuck (none ended, none retried), and never more than the channel's share at once.
    expect(smtp.trickling.size).toBe(SLOTS);
    expect(smtp.mostAtOnce()).toBe(SLOTS);
    expect(smtp.closedByClient()).toBe(0);
    const notify = new Queue('notify', { connection, prefix });
    try {
      const emails = (await notify.getJobs(['active', 'waiting', 'delayed', 'prioritized'])).filter((j) => (j.data as NotifyEffect).channel === 'email');
      expect(emails).toHaveLength(3);
      // The third e-mail was put back while the share was taken: that is not a delivery attempt.
      expect(emails.map((j) => j.attemptsMade)).toEqual([0, 0, 0]);
      expect(await notify.getFailedCount()).toBe(0);
    } finally {
      await notify.close();
    }
  });
});

/** Resolves with `done`'s value, or with 'still waiting' after `ms`. */
function within<T>(done: Promise<T>, ms: number): Promise<T | 'still waiting'> {
  let timer: NodeJS.Timeout | undefined;
  return Promise.race([done, new Promise<'still waiting'>((r) => (timer = setTimeout(() => r('still waiting'), ms)))]).finally(() => clearTimeout(timer));
}

describe('closing while an e-mail attempt hangs on a server that does not answer', () => {
  let good: MailReceiver | undefined;

  afterEach(async () => {
    await good?.close();
    good = undefined;
  });

  it('the channel’s close ends the attempt at once as retryable, possibly arrived; later deliveries are refused for a retry without connecting', async () => {
    smtp = await trickleSmtp();
    const cfg = config('{close-channel}', smtp.port, LONG_DEADLINE_MS, ['oncall@plant.example']);
    const channels = notificationChannels(cfg.channels, { logger: silentLogger(), env: {} });
    const delivery = { effect: { channel: 'email', target: 'oncall@plant.example', incidentId: 'INC-2026-0007' } as NotifyEffect, message: incidentMessage(), attempt: 1 };
    const outcome = channels.deliver(delivery).then(
      () => 'sent',
      (e: unknown) => e,
    );
    await until('the attempt hanging on the trickling server', () => smtp!.trickling.size === 1);

    expect(await within(channels.close().then(() => 'closed'), BOUND_MS)).toBe('closed');
    const error = await within(outcome, BOUND_MS);
    expect(error).toBeInstanceOf(DeliveryRetry);
    expect((error as DeliveryRetry).message).toMatch(/ECLOSED.*channel closed/);
    // The data might have gone out: the attempt may have arrived, as at the deadline.
    expect((error as DeliveryRetry).notTaken).toBe(false);
    await until('the client closing the trickled connection', () => smtp!.closedByClient() === 1);

    const after = await channels.deliver(delivery).then(
      () => 'sent',
      (e: unknown) => e,
    );
    expect(after).toBeInstanceOf(DeliveryRetry);
    expect((after as DeliveryRetry).notTaken).toBe(true);
    expect(smtp.connections()).toBe(1);
  });

  it('the worker’s close returns long before the deadline, the job left pending for a retry that the next worker delivers once', async () => {
    const prefix = '{close-worker}';
    smtp = await trickleSmtp();
    const connection = redis.client();
    const cfg = config(prefix, smtp.port, LONG_DEADLINE_MS, ['oncall@plant.example']);
    const incidents = new RedisIncidents(connection, { rules: incidentRules(cfg), prefix });
    running = startWorkers(
      { connection, config: cfg, logger: silentLogger(), channels: notificationChannels(cfg.channels, { logger: silentLogger(), env: {} }), apiBaseUrl: 'https://wearshift.plant.example' },
      { prefix, outboxIntervalMs: 200 },
    );
    await openIncident(incidents, 'PS7-P4', 'alarm');
    await until('the e-mail attempt hanging on the trickling server', () => smtp!.trickling.size === 1);

    // Without the channel ending the attempt, the close would wait for the job, up to the 10-minute deadline.
    expect(await within(running.close().then(() => 'closed'), BOUND_MS)).toBe('closed');
    running = undefined;
    await until('the client closing the trickled connection', () => smtp!.closedByClient() === 1);

    const notify = new Queue('notify', { connection, prefix });
    const ledger = new DeliveryLedger(connection, prefix);
    try {
      const jobs = (await notify.getJobs(['active', 'waiting', 'delayed', 'prioritized', 'completed', 'failed'])).filter((j) => (j.data as NotifyEffect).channel === 'email');
      expect(jobs).toHaveLength(1);
      const job = jobs[0]!;
      const effect = job.data as NotifyEffect;
      // Pending for a retry with backoff, not done and not given up.
      expect(await job.getState()).toBe('delayed');
      expect(job.attemptsMade).toBe(1);
      expect(job.failedReason).toMatch(/ECLOSED/);
      expect(await notify.getCompletedCount()).toBe(0);
      expect(await notify.getFailedCount()).toBe(0);
      expect(await ledger.delivered(effect.key)).toBe(false);
      // The attempt stays noted as possibly arrived.
      expect(await ledger.attempted(effect.key)).toEqual(expect.any(Number));

      // The next worker, with a server that answers, delivers it: once, with the message's own Message-ID.
      good = await startMailReceiver();
      const next = config(prefix, good.port, LONG_DEADLINE_MS, ['oncall@plant.example']);
      await job.promote();
      running = startWorkers(
        { connection, config: next, logger: silentLogger(), channels: notificationChannels(next.channels, { logger: silentLogger(), env: {} }), apiBaseUrl: 'https://wearshift.plant.example' },
        { prefix, outboxIntervalMs: 200 },
      );
      await until('the retried e-mail recorded as delivered', () => ledger.delivered(effect.key));
      await until('the job completed', async () => (await notify.getCompletedCount()) === 1);
      expect(good.received).toHaveLength(1);
      expect(good.received[0]!.to).toEqual(['oncall@plant.example']);
      expect(good.received[0]!.parsed.headers.get('x-wearshift-incident')).toBe(effect.incidentId);
      expect(smtp.connections()).toBe(1);
    } finally {
      await notify.close();
    }
  });
});
