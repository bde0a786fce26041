/**
 * MQTT publishing against a real broker: aedes in-process on a net server, reached over TCP by mqtt.js
 * clients, the way a plant gateway would be; the configured CloudEvents source through the Mosquitto broker at
 * 127.0.0.1:1883, under a topic prefix of its own.
 */
import { randomUUID } from 'node:crypto';
import { createServer, type AddressInfo, type Server, type Socket } from 'node:net';
import { Aedes, type AedesOptions } from 'aedes';
import { connectAsync, type MqttClient } from 'mqtt';
import { afterEach, describe, expect, it } from 'vitest';
import { toCloudEvent, type IncidentCloudEvent } from '../../src/notify/cloudEvent.ts';
import { createMqttPublisher, type MqttPublisher } from '../../src/channels/mqtt/mqttPublisher.ts';
import { mqttClientId } from '../../src/channels/mqtt/mqttChannel.ts';
import { notificationChannels } from '../../src/channels/openChannels.ts';
import { ChannelsSchema } from '../../src/domain/escalationConfig.ts';
import { parseConfig } from '../../src/domain/configFile.ts';
import type { NotifyEffect } from '../../src/incidents/model.ts';
import { silentLogger } from '../../src/telemetry/logger.ts';
import { incidentMessage } from '../unit/notify-fixtures.ts';

interface Broker {
  aedes: Aedes;
  server: Server;
  sockets: Set<Socket>;
  port: number;
}

/** Starts a broker; `beforeListen` runs once the broker exists and before any client can connect. */
async function startBroker(port = 0, options: AedesOptions = {}, beforeListen?: (aedes: Aedes) => Promise<void>): Promise<Broker> {
  const aedes = await Aedes.createBroker(options);
  await beforeListen?.(aedes);
  const sockets = new Set<Socket>();
  const server = createServer((socket) => {
    sockets.add(socket);
    socket.on('close', () => sockets.delete(socket));
    aedes.handle(socket);
  });
  await new Promise<void>((resolve, reject) => {
    server.once('error', reject);
    server.listen(port, '127.0.0.1', () => resolve());
  });
  return { aedes, server, sockets, port: (server.address() as AddressInfo).port };
}

async function stopBroker(b: Broker): Promise<void> {
  await new Promise<void>((resolve) => b.aedes.close(() => resolve()));
  for (const s of b.sockets) s.destroy();
  await new Promise<void>((resolve) => b.server.close(() => resolve()));
}

const cleanup: Array<() => Promise<unknown>> = [];
afterEach(async () => {
  for (const step of cleanup.splice(0).reverse()) await step().catch(() => undefined);
});

function publisherFor(port: number, clientId: string): MqttPublisher {
  const publisher = createMqttPublisher({ url: `mqtt://127.0.0.1:${port}`, clientId, reconnectPeriodMs: 100, connectTimeoutMs: 2000 });
  cleanup.push(() => publisher.close({ force: true }));
  return publisher;
}

async function subscriber(port: number, clientId: string, topic: string): Promise<{ client: MqttClient; received: Array<{ topic: string; qos: number; event: IncidentCloudEvent }> }> {
  const client = await connectAsync(`mqtt://127.0.0.1:${port}`, { clientId, clean: false, reconnectPeriod: 100 });
  cleanup.push(() => client.endAsync(true));
  const received: Array<{ topic: string; qos: number; event: IncidentCloudEvent }> = [];
  client.on('message', (t, payload, packet) => received.push({ topic: t, qos: packet.qos, event: JSON.parse(payload.toString('utf8')) as IncidentCloudEvent }));
  await client.subscribeAsync(topic, { qos: 1 });
  return { client, received };
}

/** Waits for an event end here only when something is broken: generous for a busy shared machine. */
const WAIT_MS = 60_000;

async function waitFor(check: () => boolean, timeoutMs: number, what: string): Promise<void> {
  const until = Date.now() + timeoutMs;
  while (!check()) {
    if (Date.now() > until) throw new Error(`timed out waiting for ${what}`);
    await new Promise((r) => setTimeout(r, 20));
  }
}

const event = toCloudEvent(incidentMessage({}, { unit: 'Line 2/P3' }), { time: '2026-03-01T08:05:00Z' });

describe('MQTT publishing', () => {
  it('delivers the CloudEvent with QoS 1 on the templated, sanitised topic', async () => {
    const broker = await startBroker();
    cleanup.push(() => stopBroker(broker));
    const sessions: Array<{ id: string; clean: boolean }> = [];
    broker.aedes.on('client', (c) => sessions.push({ id: c.id, clean: c.clean }));
    const sub = await subscriber(broker.port, 'board-1', 'plant/#');
    const publisher = publisherFor(broker.port, 'wearshift-test-1');
    const { topic } = await publisher.publish(event);
    expect(topic).toBe('plant/Line 2%2FP3/gearbox/oil');
    await waitFor(() => sub.received.length === 1, WAIT_MS, 'the subscriber to receive the event');
    expect(sub.received[0]).toEqual({ topic, qos: 1, event });
    // A persistent session under the fixed client id, so that the broker keeps our state across reconnects.
    expect(sessions).toContainEqual({ id: 'wearshift-test-1', clean: false });
  });

  it('carries the time-to-limit forecast and its caution in the event data to a subscriber', async () => {
    const { evaluateComponent } = await import('../../src/analysis/evaluate.ts');
    const { forecastComponent } = await import('../../src/analysis/forecast/forecastComponent.ts');
    const { parseConfig } = await import('../../src/domain/configFile.ts');
    const { resolveSettings } = await import('../../src/domain/settings.ts');
    const { FORECAST_CAUTION } = await import('../../src/domain/caution.ts');
    const { simulatedSamples, SIM_CONFIG } = await import('../helpers/wearFleet.ts');
    const samples = simulatedSamples({ samples: 33, intervalHours: 120 }, 13);
    const settings = resolveSettings(parseConfig(`${SIM_CONFIG}    chargeHours: 1000\n    limits: { Fe: { caution: 40, alarm: 60 } }\n`), samples[0]!);
    const f = forecastComponent(evaluateComponent(samples, settings).state, settings, undefined, { measurands: ['Fe'] });
    const items = f.measurands[0]!.limits.map((l) => ({ measurand: l.measurand, severity: l.severity, source: l.source, side: l.side, level: l.level, outcome: l.outcome, text: l.text }));
    const withForecast = toCloudEvent(incidentMessage({ forecast: { caution: f.caution, items } }), { time: '2026-03-01T08:05:00Z' });
    const broker = await startBroker();
    cleanup.push(() => stopBroker(broker));
    const sub = await subscriber(broker.port, 'board-forecast', 'plant/#');
    const publisher = publisherFor(broker.port, 'wearshift-test-forecast');
    await publisher.publish(withForecast);
    await waitFor(() => sub.received.length === 1, WAIT_MS, 'the subscriber to receive the event');
    const got = sub.received[0]!.event as IncidentCloudEvent;
    expect(got.data.forecast!.caution).toContain(FORECAST_CAUTION);
    expect(got.data.forecast!.items.map((i) => i.text)).toEqual(items.map((i) => i.text));
  });

  it('resolves only once the broker has acknowledged (PUBACK)', async () => {
    // The broker sends PUBACK only after authorizePublish has let the message through; holding that back
    // for 400 ms holds back the acknowledgement.
    let release = 0;
    const broker = await startBroker(0, {
      authorizePublish: (_client, _packet, callback) => {
        setTimeout(() => {
          release = Date.now();
          callback(null);
        }, 400);
      },
    });
    cleanup.push(() => stopBroker(broker));
    const publisher = publisherFor(broker.port, 'wearshift-test-2');
    await waitFor(() => publisher.connected, WAIT_MS, 'the publisher to connect');
    let resolvedAt = 0;
    const published = publisher.publish(event).then(() => {
      resolvedAt = Date.now();
    });
    await new Promise((r) => setTimeout(r, 200));
    expect(resolvedAt).toBe(0);
    await published;
    expect(release).toBeGreaterThan(0);
    expect(resolvedAt).toBeGreaterThanOrEqual(release);
  });

  it('closes within its grace time when the broker never acknowledges, where it waited for ever', async () => {
    // authorizePublish never answering: the broker took the message and sends no PUBACK.
    const broker = await startBroker(0, { authorizePublish: () => undefined });
    cleanup.push(() => stopBroker(broker));
    const publisher = createMqttPublisher({ url: `mqtt://127.0.0.1:${broker.port}`, clientId: 'wearshift-test-close', reconnectPeriodMs: 100, connectTimeoutMs: 2000, closeGraceMs: 500 });
    cleanup.push(() => publisher.close({ force: true }));
    await waitFor(() => publisher.connected, WAIT_MS, 'the publisher to connect');
    let settled = false;
    void publisher.publish(event).then(
      () => (settled = true),
      () => (settled = true),
    );
    await waitFor(() => broker.aedes.connectedClients === 1, WAIT_MS, 'the broker to hold the connection');
    await new Promise((r) => setTimeout(r, 100));
    expect(settled).toBe(false);
    // The grace time is half a second; a close still waiting after a minute waits for ever.
    const closed = publisher.close().then(() => 'closed' as const);
    const outcome = await Promise.race([closed, new Promise((r) => setTimeout(() => r('still waiting'), WAIT_MS))]);
    expect(outcome).toBe('closed');
    expect(publisher.connected).toBe(false);
  });

  it('queues a message while the broker is down and sends it after the broker comes back on the same port', async () => {
    let broker = await startBroker();
    const port = broker.port;
    cleanup.push(() => stopBroker(broker));
    const sub = await subscriber(port, 'board-2', 'plant/#');
    const publisher = publisherFor(port, 'wearshift-test-3');
    await publisher.publish(toCloudEvent(incidentMessage({ idempotencyKey: 'before-outage' }), { time: '2026-03-01T08:05:00Z' }));
    await waitFor(() => sub.received.length === 1, WAIT_MS, 'the first event');

    await stopBroker(broker);
    await waitFor(() => !publisher.connected, WAIT_MS, 'the publisher to notice the outage');

    let acknowledged = false;
    const pending = publisher.publish(toCloudEvent(incidentMessage({ idempotencyKey: 'during-outage' }), { time: '2026-03-01T08:06:00Z' })).then(() => {
      acknowledged = true;
    });
    await new Promise((r) => setTimeout(r, 300));
    expect(acknowledged).toBe(false);

    // The restarted broker has an empty memory, so its listener is in place before the port opens: what it
    // sees can only be the publisher's queued message, sent after reconnecting.
    const afterRestart: IncidentCloudEvent[] = [];
    broker = await startBroker(port, {}, (aedes) => new Promise<void>((resolve) => {
      aedes.subscribe('plant/#', (packet, done) => {
        afterRestart.push(JSON.parse(packet.payload.toString()) as IncidentCloudEvent);
        done();
      }, resolve);
    }));
    await pending;
    await waitFor(() => afterRestart.length === 1, WAIT_MS, 'the queued event after reconnecting');
    expect(afterRestart.map((e) => e.id)).toEqual(['during-outage']);
    expect(sub.received.map((r) => r.event.id)).toEqual(['before-outage']);
  });

  it('lets a caller stop waiting without losing the message', async () => {
    const broker = await startBroker();
    const port = broker.port;
    await stopBroker(broker);
    const publisher = publisherFor(port, 'wearshift-test-4');
    const error = await publisher.publish(event, { signal: AbortSignal.timeout(200) }).catch((e: unknown) => e);
    expect((error as Error).name).toBe('TimeoutError');
    const back = await startBroker(port);
    cleanup.push(() => stopBroker(back));
    const seen: string[] = [];
    back.aedes.on('publish', (packet, client) => {
      if (client?.id === 'wearshift-test-4') seen.push(packet.topic);
    });
    await waitFor(() => seen.length === 1, WAIT_MS, 'the message given up on to still go out');
  });

  it('does not queue a copy for each retry while the broker is away: the broker gets the message once', async () => {
    const first = await startBroker();
    const port = first.port;
    await stopBroker(first);
    const publisher = publisherFor(port, 'wearshift-test-5');
    // The notify worker's attempts: each gives up waiting, and the next tries the same message again.
    for (let attempt = 1; attempt <= 3; attempt++) {
      const error = await publisher.publish(event, { signal: AbortSignal.timeout(200) }).catch((e: unknown) => e);
      expect((error as Error).name, `attempt ${attempt}`).toBe('TimeoutError');
    }
    // The broker comes back empty, listening before the port opens: all it sees comes from the publisher's queue.
    const seen: string[] = [];
    const back = await startBroker(port, {}, (aedes) => new Promise<void>((resolve) => {
      aedes.subscribe('plant/#', (packet, done) => {
        seen.push((JSON.parse(packet.payload.toString()) as IncidentCloudEvent).id);
        done();
      }, resolve);
    }));
    cleanup.push(() => stopBroker(back));
    // A fourth attempt waits for the pending publish and resolves with its PUBACK.
    await publisher.publish(event);
    // A later message from the same client comes after anything queued before it: once it is in, every copy is.
    const marker = toCloudEvent(incidentMessage({ idempotencyKey: 'after-the-outage' }), { time: '2026-03-01T08:06:00Z' });
    await publisher.publish(marker);
    await waitFor(() => seen.includes(marker.id), WAIT_MS, 'the later message');
    expect(seen).toEqual([event.id, marker.id]);
  });

  it('keeps one client id per channel and worker across restarts, with a persistent session', async () => {
    const broker = await startBroker();
    cleanup.push(() => stopBroker(broker));
    const sessions: Array<{ id: string; clean: boolean }> = [];
    broker.aedes.on('client', (c) => sessions.push({ id: c.id, clean: c.clean }));
    const channels = ChannelsSchema.parse({ mqtt: [{ name: 'plant-bus', url: `mqtt://127.0.0.1:${broker.port}` }] });
    const effect = { channel: 'mqtt', target: 'plant-bus', incidentId: 'INC-2026-0007', at: '2026-03-01T08:05:00Z' } as NotifyEffect;
    const env = { WEARSHIFT_WORKER_ID: 'pump house 2' };
    // A worker, then the same worker after a restart.
    for (let run = 0; run < 2; run++) {
      const open = notificationChannels(channels, { logger: silentLogger(), env, mqttTimeoutMs: WAIT_MS });
      await expect(open.deliver({ effect, message: incidentMessage(), attempt: 1 })).resolves.toMatch(/^mqtt plant-bus: plant\//);
      await open.close();
    }
    expect(sessions).toEqual([
      { id: 'wearshift-plant-bus-pump-house-2', clean: false },
      { id: 'wearshift-plant-bus-pump-house-2', clean: false },
    ]);
    // Without WEARSHIFT_WORKER_ID the host name names the worker; the process id never does.
    expect(mqttClientId('plant-bus', {}, 'gw-01.plant')).toBe('wearshift-plant-bus-gw-01.plant');
    expect(mqttClientId('plant-bus', { WEARSHIFT_WORKER_ID: ' ' }, 'gw-01.plant')).toBe('wearshift-plant-bus-gw-01.plant');
    expect(mqttClientId('plant-bus', {})).not.toContain(String(process.pid));
  });

  it('refuses a template that would publish to wildcards', () => {
    expect(() => createMqttPublisher({ url: 'mqtt://127.0.0.1:1', clientId: 'x', topicTemplate: 'plant/+/oil' })).toThrow(/"\+", "#"/);
    expect(() => createMqttPublisher({ url: 'mqtt://127.0.0.1:1', clientId: '' })).toThrow(/clientId/);
  });
});

describe('the CloudEvents source an MQTT channel is configured with', () => {
  it('is the source of the event a subscriber gets through the Mosquitto broker; a channel that names none keeps the default', async () => {
    const url = 'mqtt://127.0.0.1:1883';
    // A topic prefix and worker id of this run's own on the shared broker.
    const prefix = `wearshift-test-${randomUUID()}`;
    const env = { WEARSHIFT_WORKER_ID: randomUUID() };
    const config = parseConfig(`
channels:
  mqtt:
    - { name: north-bus, url: "${url}", topic: "${prefix}/north/{unit}/{component}", source: "/plant-north/{unit}/{component}?severity={severity}" }
    - { name: south-bus, url: "${url}", topic: "${prefix}/south/{unit}/{component}" }
`);
    const received: Array<{ topic: string; payload: string }> = [];
    const subscriber = await connectAsync(url, { clientId: `${prefix}-sub`, clean: true });
    cleanup.push(() => subscriber.endAsync(true));
    subscriber.on('message', (topic, payload) => received.push({ topic, payload: payload.toString('utf8') }));
    await subscriber.subscribeAsync(`${prefix}/#`, { qos: 1 });
    const open = notificationChannels(config.channels, { logger: silentLogger(), env, mqttTimeoutMs: WAIT_MS });
    cleanup.push(async () => {
      // The channels keep persistent sessions on the broker; this test's are ended.
      for (const name of ['north-bus', 'south-bus']) await (await connectAsync(url, { clientId: mqttClientId(name, env), clean: true })).endAsync();
    });
    const message = incidentMessage({}, { unit: 'Line 2/P3' });
    const effect = (target: string) => ({ channel: 'mqtt', target, incidentId: message.incident.id, at: '2026-03-01T08:05:00Z' }) as NotifyEffect;
    try {
      await expect(open.deliver({ effect: effect('north-bus'), message, attempt: 1 })).resolves.toBe(`mqtt north-bus: ${prefix}/north/Line 2%2FP3/gearbox`);
      await expect(open.deliver({ effect: effect('south-bus'), message, attempt: 1 })).resolves.toBe(`mqtt south-bus: ${prefix}/south/Line 2%2FP3/gearbox`);
    } finally {
      await open.close();
    }
    await waitFor(() => received.length === 2, WAIT_MS, 'the subscriber to receive both events');
    const byTopic = new Map(received.map((r) => [r.topic, r.payload]));
    const north = JSON.parse(byTopic.get(`${prefix}/north/Line 2%2FP3/gearbox`)!) as IncidentCloudEvent;
    expect(north.source).toBe('/plant-north/Line%202%2FP3/gearbox?severity=caution');
    expect(north.id).toBe(message.idempotencyKey);
    // Without the option the payload is exactly what it was before the option existed.
    const south = byTopic.get(`${prefix}/south/Line 2%2FP3/gearbox`)!;
    expect((JSON.parse(south) as IncidentCloudEvent).source).toBe('/wearshift/Line%202%2FP3/gearbox');
    expect(south).toBe(JSON.stringify(toCloudEvent(message, { time: '2026-03-01T08:05:00Z' })));
  });
});
