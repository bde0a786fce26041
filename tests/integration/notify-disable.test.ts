/**
 * A webhook receiver that answers 410 Gone is not called again (the Standard Webhooks convention for "stop
 * sending"): the mark lives in Redis, so every worker process and every later message respects it.
 */
import { createServer, type Server } from 'node:http';
import type { AddressInfo } from 'node:net';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { ChannelsSchema } from '../../src/domain/escalationConfig.ts';
import type { NotifyEffect } from '../../src/incidents/model.ts';
import { redisDisabledEndpoints } from '../../src/redis/disabledEndpoints.ts';
import { notificationChannels } from '../../src/channels/openChannels.ts';
import { silentLogger } from '../../src/telemetry/logger.ts';
import { startRedisServer, type RedisServer } from '../helpers/redisServer.ts';
import { incidentMessage } from '../unit/notify-fixtures.ts';

let redis: RedisServer;
let receiver: Server;
let requests = 0;

beforeAll(async () => {
  redis = await startRedisServer();
  receiver = createServer((req, res) => {
    requests++;
    req.resume();
    res.writeHead(410).end();
  });
  await new Promise<void>((r) => receiver.listen(0, '127.0.0.1', r));
});

afterAll(async () => {
  await new Promise((r) => receiver.close(r));
  await redis.dispose();
});

function effect(seq: number): NotifyEffect {
  const message = incidentMessage();
  return {
    kind: 'notify',
    key: `${message.incident.id}:${seq}:webhook:0:plant-bus`,
    incidentId: message.incident.id,
    eventSeq: seq,
    type: 'wearshift.incident.updated',
    channel: 'webhook',
    target: 'plant-bus',
    tier: 0,
    at: '2026-03-01T08:00:00.000Z',
    incident: {} as NotifyEffect['incident'],
  } as NotifyEffect;
}

describe('410 Gone disables a webhook endpoint', () => {
  it('the first delivery fails for good and marks the endpoint; later ones, from any process, are not sent', async () => {
    const { port } = receiver.address() as AddressInfo;
    const channels = ChannelsSchema.parse({ webhooks: [{ name: 'plant-bus', url: `http://127.0.0.1:${port}/hook`, secrets: [`whsec_${Buffer.alloc(32, 7).toString('base64')}`] }] });
    const first = notificationChannels(channels, { logger: silentLogger(), disabledEndpoints: redisDisabledEndpoints(redis.client(), '{t}') });
    await expect(first.deliver({ effect: effect(1), message: incidentMessage(), attempt: 1 })).rejects.toThrow(/410 Gone.*disabled/);
    expect(requests).toBe(1);

    // Another worker process: its own channels, the same Redis.
    const second = notificationChannels(channels, { logger: silentLogger(), disabledEndpoints: redisDisabledEndpoints(redis.client(), '{t}') });
    await expect(second.deliver({ effect: effect(2), message: incidentMessage(), attempt: 1 })).resolves.toMatch(/not sent, the endpoint is disabled \(410 Gone/);
    expect(requests).toBe(1);
    await Promise.all([first.close(), second.close()]);
  });
});
