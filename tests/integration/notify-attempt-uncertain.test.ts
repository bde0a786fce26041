/**
 * A message whose attempt ended without the channel's answer may have reached its target. When the incident has since
 * been acknowledged, the retry does not send the escalation again, and the record must not claim it was never sent:
 * it says an attempt began at that time and may have reached the target. An attempt the receiver answered with an
 * error (HTTP 503) left nothing behind: that message reads plainly "not sent". A real webhook receiver (one that
 * takes the request and never answers, one that answers 503) and a private Redis; the notify processor is called as
 * BullMQ calls it, once per attempt.
 */
import { randomBytes } from 'node:crypto';
import { createServer, type ServerResponse, type Server } from 'node:http';
import type { AddressInfo } from 'node:net';
import type { Job } from 'bullmq';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { DeliveryRetry } from '../../src/channels/errors.ts';
import { notificationChannels } from '../../src/channels/openChannels.ts';
import { notifiedTargetsText, type NotifyEffect } from '../../src/incidents/model.ts';
import { incidentRules } from '../../src/incidents/policy.ts';
import { notifyProcessor } from '../../src/queue/processors/notifyProcessor.ts';
import { DeliveryLedger } from '../../src/redis/deliveryLedger.ts';
import { RedisIncidents } from '../../src/redis/redisIncidents.ts';
import { RedisStore } from '../../src/redis/redisStore.ts';
import { silentLogger } from '../../src/telemetry/logger.ts';
import { startRedisServer, type RedisServer } from '../helpers/redisServer.ts';
import { openIronAlarms, webhookEscalationConfig } from '../helpers/webhookEscalation.ts';

const prefix = '{attempt}';
const SECRET = `whsec_${randomBytes(32).toString('base64')}`;

let redis: RedisServer;
let receiver: Server;
/** Requests the silent endpoint took and never answered, answered at the end. */
const unanswered: ServerResponse[] = [];
const received: string[] = [];

beforeAll(async () => {
  redis = await startRedisServer();
  receiver = createServer((req, res) => {
    req.resume();
    req.on('end', () => {
      received.push(req.url ?? '');
      if (req.url === '/silent') unanswered.push(res);
      else if (req.url === '/busy') res.writeHead(503).end('busy');
      else res.writeHead(204).end();
    });
  });
  await new Promise<void>((resolve) => receiver.listen(0, '127.0.0.1', () => resolve()));
});

afterAll(async () => {
  for (const res of unanswered) res.destroy();
  receiver.closeAllConnections();
  await new Promise<void>((resolve) => receiver.close(() => resolve()));
  await redis?.dispose();
});

describe('a message whose attempt ended without an answer', () => {
  it('is not sent again after the acknowledgement, and its record says it may have reached the target', async () => {
    const { port } = receiver.address() as AddressInfo;
    const config = webhookEscalationConfig(prefix, port, SECRET, [['first-line'], ['silent', 'busy']], [{ name: 'first-line' }, { name: 'silent', timeoutMs: 300 }, { name: 'busy' }]);
    const connection = redis.client();
    const incidents = new RedisIncidents(connection, { rules: incidentRules(config), prefix });
    const store = new RedisStore(connection, { prefix, config });
    const deliveries = new DeliveryLedger(connection, prefix);
    const held = await openIronAlarms(incidents, ['PS7-Gearbox']);
    const escalations = held.filter((e): e is NotifyEffect => e.kind === 'notify' && e.type === 'wearshift.incident.escalated');
    const to = (target: string) => escalations.find((e) => e.target === target)!;
    expect(escalations.map((e) => e.target).sort()).toEqual(['busy', 'silent']);

    const processor = notifyProcessor({
      store,
      ledger: store,
      config,
      channels: notificationChannels(config.channels, { logger: silentLogger(), env: {} }),
      apiBaseUrl: 'https://wearshift.plant.example',
      logger: silentLogger(),
      deliveries,
      incidents,
    });
    const attempt = (effect: NotifyEffect, attemptsMade: number) => processor({ name: effect.type, data: effect, attemptsMade } as unknown as Job<NotifyEffect>, undefined);

    // First attempts: the silent receiver takes the request and never answers (our timeout ends it); the busy one
    // answers 503. Both are retried later.
    const silentFirst = await attempt(to('silent'), 0).then(
      () => undefined,
      (e: unknown) => e,
    );
    expect(silentFirst).toBeInstanceOf(DeliveryRetry);
    expect((silentFirst as DeliveryRetry).notTaken).toBe(false);
    const busyFirst = await attempt(to('busy'), 0).then(
      () => undefined,
      (e: unknown) => e,
    );
    expect(busyFirst).toBeInstanceOf(DeliveryRetry);
    expect((busyFirst as DeliveryRetry).notTaken).toBe(true);
    expect(received.filter((u) => u === '/silent')).toHaveLength(1);
    expect(await deliveries.attempted(to('silent').key)).toEqual(expect.any(Number));
    expect(await deliveries.attempted(to('busy').key)).toBeUndefined();

    // Meanwhile the on-call engineer acknowledges: the retries send nothing.
    const incidentId = to('silent').incidentId;
    await incidents.applyAction({ kind: 'acknowledge', incidentId, by: 'R. Okafor', now: new Date() });
    expect(String(await attempt(to('silent'), 1))).toMatch(/^webhook silent: not sent, the incident was acknowledged by R\. Okafor at .*; not sent again \(an attempt begun at .* ended without an answer and may have reached it\)$/);
    expect(String(await attempt(to('busy'), 1))).toMatch(/^webhook busy: not sent, the incident was acknowledged by R\. Okafor at [^;]*$/);
    expect(received.filter((u) => u === '/silent')).toHaveLength(1);
    expect(received.filter((u) => u === '/busy')).toHaveLength(1);

    // The record: the silent target's message may have arrived, the busy one's did not.
    const incident = (await incidents.get(incidentId))!;
    const entry = incident.notifications.find((n) => n.type === 'wearshift.incident.escalated')!;
    const silent = entry.withdrawn!.find((w) => w.target === 'webhook:silent')!;
    const busy = entry.withdrawn!.find((w) => w.target === 'webhook:busy')!;
    expect(silent.attemptedAt).toEqual(new Date((await deliveries.attempted(to('silent').key))!).toISOString());
    expect(busy.attemptedAt).toBeUndefined();
    expect(notifiedTargetsText(entry)).toBe(
      `webhook:silent (not sent again: acknowledged meanwhile; an attempt begun at ${silent.attemptedAt} may have reached it), webhook:busy (not sent: acknowledged meanwhile)`,
    );
  });
});
