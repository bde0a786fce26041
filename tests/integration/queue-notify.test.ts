/**
 * From a lab result to people and systems: the worker evaluates, the incident store's outbox fills the
 * notify and escalate queues, and the messages arrive at a real SMTP server (npm smtp-server) and a real
 * HTTP receiver whose signature check is the Standard Webhooks reference library (npm standardwebhooks).
 */
import { randomBytes } from 'node:crypto';
import { createServer, type Server } from 'node:http';
import type { AddressInfo } from 'node:net';
import { PNG } from 'pngjs';
import { EMAIL_CHART_WIDTH } from '../../src/notify/incidentChart.ts';
import { startMailReceiver, type MailReceiver } from '../../src/demo/mailReceiver.ts';
import { Webhook } from 'standardwebhooks';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { parseConfig } from '../../src/domain/configFile.ts';
import { incidentRules } from '../../src/incidents/policy.ts';
import { RedisIncidents as RedisIncidentStore } from '../../src/redis/redisIncidents.ts';
import { createResultProducer } from '../../src/queue/producer.ts';
import { notificationChannels } from '../../src/channels/openChannels.ts';
import { startWorkers, type RunningWorkers } from '../../src/queue/workers.ts';
import { Queue } from 'bullmq';
import type { NotifyEffect } from '../../src/incidents/model.ts';
import { relayEffects } from '../../src/queue/outboxRelay.ts';
import { idempotencyKey } from '../../src/notify/incidentMessage.ts';
import { silentLogger } from '../../src/telemetry/logger.ts';
import { startRedisServer, type RedisServer } from '../helpers/redisServer.ts';

const WEBHOOK_SECRET = `whsec_${randomBytes(24).toString('base64')}`;
const prefix = '{notify}';

let redis: RedisServer;
let smtp: MailReceiver;
let receiver: Server;
const hooks: Array<{ type: string; id: string; incidentId: string; verified: boolean }> = [];
let workers: RunningWorkers;
let store: RedisIncidentStore;

async function until<T>(what: string, probe: () => T | undefined, timeoutMs = 120_000): Promise<T> {
  const deadline = Date.now() + timeoutMs;
  for (;;) {
    const v = probe();
    if (v !== undefined) return v;
    if (Date.now() > deadline) throw new Error(`timed out waiting for ${what}`);
    await new Promise((r) => setTimeout(r, 100));
  }
}

beforeAll(async () => {
  redis = await startRedisServer();
  smtp = await startMailReceiver();
  const verifier = new Webhook(WEBHOOK_SECRET);
  receiver = createServer((req, res) => {
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
      const event = JSON.parse(body) as { type: string; id: string; data: { incident: { id: string } } };
      hooks.push({ type: event.type, id: event.id, incidentId: event.data.incident.id, verified });
      res.writeHead(verified ? 204 : 401).end();
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
    - name: booster-on-call
      tiers:
        - { afterMinutes: 0, email: [oncall@waterworks.example], webhooks: [control-room] }
        - { afterMinutes: 0.02, email: [duty-manager@waterworks.example] }
channels:
  email:
    from: "wearshift <alerts@waterworks.example>"
    smtp: { host: 127.0.0.1, port: ${smtp.port}, secure: false }
  webhooks:
    - { name: control-room, url: "http://127.0.0.1:${(receiver.address() as AddressInfo).port}/hooks", secrets: [NOTIFY_TEST_WEBHOOK_SECRET] }
  ackLinks: { baseUrl: "https://wearshift.waterworks.example", secretEnv: NOTIFY_TEST_ACK_SECRET }
`);
  const env = { NOTIFY_TEST_WEBHOOK_SECRET: WEBHOOK_SECRET, NOTIFY_TEST_ACK_SECRET: 'ack-secret-for-tests-0123456789' };
  const connection = redis.client();
  store = new RedisIncidentStore(connection, { rules: incidentRules(config), prefix });
  workers = startWorkers(
    { connection, config, logger: silentLogger(), channels: notificationChannels(config.channels, { logger: silentLogger(), env }), apiBaseUrl: 'https://wearshift.waterworks.example' },
    { prefix, outboxIntervalMs: 200 },
  );
});

afterAll(async () => {
  await workers?.close();
  await smtp?.close();
  await new Promise<void>((resolve) => (receiver ? receiver.close(() => resolve()) : resolve()));
  await redis?.dispose();
});

describe('notifications from the live worker', () => {
  it('an alarm reaches tier 0 by e-mail and signed webhook, escalates to tier 1, and the acknowledgement is announced', async () => {
    const producer = createResultProducer({ connection: redis.client(), prefix });
    const day = 86_400_000;
    const base = Date.now() - 3 * day;
    const outcomes = await producer.add(
      [12, 18, 95].map((fe, i) => ({
        sampleId: `WW-${i + 1}`,
        unit: 'BP4-Hill Street',
        component: 'gearbox',
        sampledAt: new Date(base + i * day).toISOString(),
        oilHours: 250 * (i + 1),
        readings: { Fe: fe },
      })),
    );
    await producer.close();
    expect(outcomes.every((o) => o.status === 'accepted')).toBe(true);

    const opened = await until('the webhook', () => hooks.find((h) => h.type === 'wearshift.incident.opened'));
    expect(opened.verified).toBe(true);
    expect(opened.incidentId).toBe('BP4-Hill Street/gearbox@WW-3');
    const first = await until('the tier-0 e-mail', () => smtp.received.find((m) => m.to.includes('oncall@waterworks.example')));
    expect(first.parsed.subject).toMatch(/BP4-Hill Street/);
    expect(first.parsed.text).toMatch(/https:\/\/wearshift\.waterworks\.example\/ack\//);
    expect(first.parsed.text).toMatch(/WW-3/);
    // The trend chart travels inline: a PNG of the documented width that the HTML part shows with alt text.
    const chart = first.parsed.attachments.find((a) => a.contentType === 'image/png');
    expect(chart).toBeDefined();
    const png = PNG.sync.read(chart!.content);
    expect(png.width).toBe(EMAIL_CHART_WIDTH);
    expect(png.height).toBeGreaterThan(100);
    expect(chart!.contentId).toBe('<trend-chart@wearshift>');
    // mailparser inlines cid: images as data URLs; the alt text names the measurand in words.
    expect(String(first.parsed.html)).toMatch(/<img src="(cid:trend-chart@wearshift|data:image\/png;base64,[^"]+)"[^>]* alt="[^"]*(Fe|iron)[^"]*"/);

    const escalated = await until('the tier-1 e-mail', () => smtp.received.find((m) => m.to.includes('duty-manager@waterworks.example')));
    expect(escalated.parsed.headers.get('x-wearshift-event')).toBe('escalated');

    await store.applyAction({ kind: 'acknowledge', incidentId: opened.incidentId, by: 'R. Okafor', now: new Date() });
    const acked = await until('the acknowledgement webhook', () => hooks.find((h) => h.type === 'wearshift.incident.acknowledged'));
    expect(acked.verified).toBe(true);
    // One delivery per effect, whatever the retries and relays.
    expect(new Set(hooks.map((h) => h.id)).size).toBe(hooks.length);
  });

  it('a delivered message handed to the queue again after its job was removed is not sent twice', async () => {
    // An outbox relay that died between handing effects over and confirming them hands them over again when its
    // claim runs out; by then the first job may be gone (completed jobs are kept by count and age), so the job id
    // alone no longer makes it one job.
    const connection = redis.client();
    const notify = new Queue('notify', { connection, prefix });
    const escalate = new Queue('escalate', { connection, prefix });
    try {
      const done = await notify.getCompleted();
      const first = done.find((j) => (j.data as NotifyEffect).channel === 'webhook');
      expect(first).toBeDefined();
      const effect = first!.data as NotifyEffect;
      const before = hooks.filter((h) => h.id === idempotencyKey(effect.key)).length;
      expect(before).toBe(1);
      await first!.remove();
      await relayEffects([effect], { notify, escalate }, Date.now());
      const deadline = Date.now() + 120_000;
      let state = '';
      let job = await notify.getJob(first!.id!);
      while (Date.now() < deadline) {
        job = await notify.getJob(first!.id!);
        state = job === undefined ? 'gone' : await job.getState();
        if (state === 'completed' || state === 'failed') break;
        await new Promise((r) => setTimeout(r, 100));
      }
      expect(state).toBe('completed');
      // Read again: the job read before its state may predate its completion.
      job = await notify.getJob(first!.id!);
      expect(String(job!.returnvalue)).toMatch(/delivered before; not sent again/);
      expect(hooks.filter((h) => h.id === idempotencyKey(effect.key))).toHaveLength(1);
    } finally {
      await notify.close();
      await escalate.close();
    }
  });
});
