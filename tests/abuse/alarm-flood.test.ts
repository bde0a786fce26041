/**
 * Alarm flood (ISA-18.2: group, rate-limit, summarise): one request opens an alarm on each of 30 units at once. With
 * `channels.floodControl` at 5 messages per target per window, each target — an e-mail address at a real SMTP server
 * (npm smtp-server), a webhook at a real HTTP receiver checked with the Standard Webhooks reference library (npm
 * standardwebhooks) — gets at most 5 single messages per window, and one summary per window lists the rest; every
 * incident reaches each target exactly once, singly or in a summary. Live worker on a private redis-server; /healthz
 * of the same process is polled meanwhile, and its latency and the memory growth bounded generously.
 */
import { randomBytes } from 'node:crypto';
import { createServer, type Server } from 'node:http';
import type { AddressInfo } from 'node:net';
import { Webhook } from 'standardwebhooks';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { parseConfig } from '../../src/domain/configFile.ts';
import { createResultProducer } from '../../src/queue/producer.ts';
import { notificationChannels } from '../../src/channels/openChannels.ts';
import { startWorkers, type RunningWorkers } from '../../src/queue/workers.ts';
import { silentLogger } from '../../src/telemetry/logger.ts';
import { startMailReceiver, type MailReceiver } from '../../src/demo/mailReceiver.ts';
import { startRedisServer, type RedisServer } from '../helpers/redisServer.ts';
import Fastify, { type FastifyInstance } from 'fastify';
import { healthRoutes } from '../../src/http/healthRoutes.ts';
import { healthProbe } from '../helpers/healthProbe.ts';

const WEBHOOK_SECRET = `whsec_${randomBytes(24).toString('base64')}`;
const prefix = '{alarm-flood}';
const UNITS = 30;
const MAX = 5;
/** 20 s windows: long enough for the flood to fall in one or two, short enough to wait for the summary. */
const WINDOW_MINUTES = 1 / 3;
const WINDOW_MS = WINDOW_MINUTES * 60_000;
/** Generous bounds for a busy two-core machine, never the speed of this one. */
const HEALTHZ_MAX_MS = 2000;
const MEMORY_GROWTH_MAX = 300 * 1024 * 1024;

interface Received {
  readonly at: number;
  readonly kind: 'single' | 'summary';
  /** Incident ids: the one of a single message, every held one of a summary. */
  readonly incidents: string[];
}

let redis: RedisServer;
let smtp: MailReceiver;
let receiver: Server;
let workers: RunningWorkers;
/** /healthz served from this process, where the queue workers run: a flood must not stall it. */
let health: FastifyInstance;
let healthBase: string;
const mail: Received[] = [];
const hooks: Received[] = [];
const summaryTexts: string[] = [];

async function until(what: string, probe: () => boolean, timeoutMs: number): Promise<void> {
  const deadline = Date.now() + timeoutMs;
  while (!probe()) {
    if (Date.now() > deadline) throw new Error(`timed out waiting for ${what}`);
    await new Promise((r) => setTimeout(r, 200));
  }
}

beforeAll(async () => {
  redis = await startRedisServer();
  smtp = await startMailReceiver();
  smtp.onMail(({ receivedAt, parsed: m }) => {
    const type = m.headers.get('x-wearshift-type');
    if (type === 'flood-summary') {
      summaryTexts.push(m.text ?? '');
      const ids = [...(m.text ?? '').matchAll(/ · (FL-\d+\/gearbox@[^\s]+)$/gm)].map((x) => x[1]!);
      mail.push({ at: receivedAt, kind: 'summary', incidents: ids });
    } else {
      const id = /Incident (FL-\d+\/gearbox@\S+) on /.exec(m.text ?? '')?.[1];
      mail.push({ at: receivedAt, kind: 'single', incidents: id === undefined ? [] : [id] });
    }
  });
  const verifier = new Webhook(WEBHOOK_SECRET);
  receiver = createServer((req, res) => {
    const chunks: Buffer[] = [];
    req.on('data', (c: Buffer) => chunks.push(c));
    req.on('end', () => {
      const body = Buffer.concat(chunks).toString('utf8');
      try {
        verifier.verify(body, req.headers as Record<string, string>);
      } catch {
        res.writeHead(401).end();
        return;
      }
      const event = JSON.parse(body) as { type: string; data: { incident?: { id: string }; held?: { incidentId: string }[] } };
      if (event.type === 'wearshift.incidents.flood-summary') hooks.push({ at: Date.now(), kind: 'summary', incidents: event.data.held!.map((h) => h.incidentId) });
      else hooks.push({ at: Date.now(), kind: 'single', incidents: [event.data.incident!.id] });
      res.writeHead(204).end();
    });
  });
  await new Promise<void>((resolve) => receiver.listen(0, '127.0.0.1', () => resolve()));

  const config = parseConfig(`
redis: { prefix: "${prefix}" }
groups:
  - name: booster-pumps
    match: { component: gearbox }
    limits: { Fe: { caution: 40, alarm: 80 } }
escalation:
  policies:
    - name: on-call
      tiers:
        - { afterMinutes: 0, email: [oncall@waterworks.example], webhooks: [control-room] }
channels:
  email:
    from: "wearshift <alerts@waterworks.example>"
    smtp: { host: 127.0.0.1, port: ${smtp.port}, secure: false }
  webhooks:
    - { name: control-room, url: "http://127.0.0.1:${(receiver.address() as AddressInfo).port}/hooks", secrets: [FLOOD_TEST_WEBHOOK_SECRET] }
  floodControl: { maxMessages: ${MAX}, windowMinutes: ${WINDOW_MINUTES} }
`);
  health = Fastify();
  await health.register(healthRoutes, { ping: async () => 'PONG' });
  healthBase = await health.listen({ host: '127.0.0.1', port: 0 });
  const env = { FLOOD_TEST_WEBHOOK_SECRET: WEBHOOK_SECRET };
  workers = startWorkers(
    { connection: redis.client(), config, logger: silentLogger(), channels: notificationChannels(config.channels, { logger: silentLogger(), env }), apiBaseUrl: 'https://wearshift.waterworks.example' },
    { prefix, outboxIntervalMs: 200 },
  );
}, 60_000);

afterAll(async () => {
  await workers?.close();
  await health?.close();
  await smtp?.close();
  await new Promise<void>((resolve) => (receiver ? receiver.close(() => resolve()) : resolve()));
  await redis?.dispose();
});

/**
 * The most single messages the allowance permits for what was received: a message is admitted in its window and
 * arrives then or later, so the admitting windows run from the one before the first arrival to the last arrival's.
 */
function allowance(received: readonly Received[]): number {
  const windows = received.filter((r) => r.kind === 'single').map((r) => Math.floor(r.at / WINDOW_MS));
  return MAX * (Math.max(...windows) - Math.min(...windows) + 2);
}

describe('alarm flood', () => {
  it('rate-limits each target and summarises the rest, losing no incident', async () => {
    const rssBefore = process.memoryUsage().rss;
    const probe = healthProbe(healthBase, 100);
    const producer = createResultProducer({ connection: redis.client(), prefix });
    const sampledAt = new Date(Date.now() - 3_600_000).toISOString();
    const outcomes = await producer.add(Array.from({ length: UNITS }, (_, i) => ({ sampleId: `LAB-${i}`, unit: `FL-${i}`, component: 'gearbox', sampledAt, oilHours: 200, readings: { Fe: 120 } })));
    await producer.close();
    expect(outcomes.every((o) => o.status === 'accepted')).toBe(true);

    const covered = (received: readonly Received[]) => new Set(received.flatMap((r) => r.incidents)).size;
    // Every incident reaches each target, singly or in a summary (the last summary comes at its window's end).
    await until('every incident by e-mail and webhook', () => covered(mail) === UNITS && covered(hooks) === UNITS, 5 * 60_000);
    const probed = await probe.stop();
    expect(probed.failures).toEqual([]);
    expect(probed.answered).toBeGreaterThan(0);
    expect(probed.slowest).toBeLessThan(HEALTHZ_MAX_MS);
    expect(process.memoryUsage().rss - rssBefore).toBeLessThan(MEMORY_GROWTH_MAX);

    for (const received of [mail, hooks]) {
      const all = received.flatMap((r) => r.incidents);
      // Exactly once each: no incident both sent singly and summarised, none twice.
      expect(all).toHaveLength(UNITS);
      expect(received.some((r) => r.kind === 'summary')).toBe(true);
      // The allowance held: far fewer single messages than incidents (without flood control, one each).
      const singles = received.filter((r) => r.kind === 'single').length;
      expect(singles).toBeLessThanOrEqual(allowance(received));
      expect(singles).toBeLessThan(UNITS);
    }
    // The summary says what happened and keeps the advisory caution. How many it holds depends on where the flood
    // falls in the allowance's window: one message is said in the singular.
    expect(summaryTexts[0]).toMatch(/^Alarm flood: \d+ more incident messages? on \d+ components? held back \(\d+ incidents? at alarm\)/);
    expect(summaryTexts[0]).toContain('https://wearshift.waterworks.example/incidents/');
    expect(summaryTexts[0]).toContain('wearshift advises');
  }, 6 * 60_000);
});
