/**
 * What wearshift tells other systems, against the published AsyncAPI document (schemas/asyncapi.json) with Ajv, over
 * real transports: the live event stream of a real HTTP server (GET /v1/events, server-sent events), where every
 * incident change carries the caution beside its severity; an MQTT channel configured for QoS 2 publishing through the
 * broker at 127.0.0.1:1883 (under a topic prefix of its own); and the HELP text of the finding and alarm metrics of
 * /metrics.
 */
import { randomUUID } from 'node:crypto';
import { readFileSync } from 'node:fs';
import { Ajv2020 } from 'ajv/dist/2020.js';
import { connectAsync } from 'mqtt';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { mqttClientId } from '../../src/channels/mqtt/mqttChannel.ts';
import { notificationChannels } from '../../src/channels/openChannels.ts';
import { ADVISORY_CAUTION } from '../../src/domain/caution.ts';
import { ChannelsSchema } from '../../src/domain/escalationConfig.ts';
import { createEventHub, type EventHub } from '../../src/http/eventHub.ts';
import { buildServer, type WearshiftServer } from '../../src/http/server.ts';
import type { NotifyEffect } from '../../src/incidents/model.ts';
import type { LiveEvent } from '../../src/pipeline/liveEvent.ts';
import { accessTokensFromEnv } from '../../src/runtime/accessTokensFromEnv.ts';
import { registerAlarmGauges } from '../../src/runtime/alarmGauges.ts';
import { AlarmFiguresSchema } from '../../src/domain/alarmFiguresConfig.ts';
import { silentLogger } from '../../src/telemetry/logger.ts';
import { createMetrics } from '../../src/telemetry/metrics.ts';
import { incidentMessage } from '../unit/notify-fixtures.ts';

type Json = Record<string, any>; // eslint-disable-line @typescript-eslint/no-explicit-any

const published = JSON.parse(readFileSync(new URL('../../schemas/asyncapi.json', import.meta.url), 'utf8')) as Json;
const ajv = new Ajv2020({ strict: false, allErrors: true });

function expectValid(schemaName: string, value: unknown): void {
  const validate = ajv.getSchema(schemaName) ?? (ajv.addSchema(published.components.schemas[schemaName] as Json, schemaName), ajv.getSchema(schemaName)!);
  expect(validate(value), `${schemaName}: ${ajv.errorsText(validate.errors)}`).toBe(true);
}

const VIEWER = `viewer-${randomUUID()}`;
/** Generous bounds for a busy shared machine: they end a wait only when something is broken. */
const WAIT_MS = 60_000;

let hub: EventHub;
let app: WearshiftServer;
let base: string;

beforeAll(async () => {
  hub = createEventHub();
  const metrics = createMetrics({ defaultMetrics: false });
  registerAlarmGauges(metrics.registry, {
    source: async () => ({ incidents: [], components: 1, truncated: false }),
    config: AlarmFiguresSchema.parse({}),
    responders: { all: [], of: () => [] },
  });
  app = await buildServer({ tokens: accessTokensFromEnv({ WEARSHIFT_TOKEN_VIEWER: VIEWER }), logger: silentLogger(), metrics, ping: async () => 'PONG', hub });
  base = await app.listen({ port: 0, host: '127.0.0.1' });
});

afterAll(async () => {
  await app?.close();
});

/** Reads server-sent events from the stream until `count` have arrived. */
async function readEvents(body: ReadableStream<Uint8Array>, count: number): Promise<{ event: string; data: unknown }[]> {
  const reader = body.getReader();
  const decoder = new TextDecoder();
  let text = '';
  const events: { event: string; data: unknown }[] = [];
  const deadline = Date.now() + WAIT_MS;
  while (events.length < count) {
    if (Date.now() > deadline) throw new Error(`only ${events.length} of ${count} events arrived`);
    const { value, done } = await reader.read();
    if (done) throw new Error('the stream ended');
    text += decoder.decode(value, { stream: true });
    let end: number;
    while ((end = text.indexOf('\n\n')) >= 0) {
      const block = text.slice(0, end);
      text = text.slice(end + 2);
      const fields = Object.fromEntries(block.split('\n').filter((l) => !l.startsWith(':') && l.includes(': ')).map((l) => [l.slice(0, l.indexOf(': ')), l.slice(l.indexOf(': ') + 2)]));
      if (fields.event !== undefined) events.push({ event: fields.event, data: JSON.parse(fields.data!) });
    }
  }
  await reader.cancel();
  return events;
}

describe('the live event stream', () => {
  it('sends every incident change with the caution beside its severity, as the published schema says', async () => {
    const res = await fetch(`${base}/v1/events`, { headers: { authorization: `Bearer ${VIEWER}` } });
    expect(res.status).toBe(200);
    const until = Date.now() + WAIT_MS;
    while (hub.subscribers < 1 && Date.now() < until) await new Promise((r) => setTimeout(r, 20));
    // As a worker publishes them: the change carries no caution of its own.
    const change: LiveEvent = { type: 'incident', incidentId: 'PS2-P3/gearbox@LAB-0042', unit: 'PS2-P3', component: 'gearbox', severity: 'alarm', state: 'active, unacknowledged', change: 'opened', at: '2026-03-01T08:00:00.000Z' };
    hub.publish(change);
    hub.publish({ type: 'result', unit: 'PS2-P3', component: 'gearbox', sampleId: 'LAB-0043', sampledAt: '2026-03-08T08:00:00.000Z' });
    const [incident, result] = await readEvents(res.body!, 2);

    expect(incident!.event).toBe('incident');
    expect(incident!.data).toEqual({ ...change, advisory: ADVISORY_CAUTION });
    expectValid('LiveIncidentEvent', incident!.data);
    expect(result!.event).toBe('result');
    expectValid('LiveResultEvent', result!.data);
    // The schema asks for the caution: an incident change without it is refused.
    expect(ajv.getSchema('LiveIncidentEvent')!(change)).toBe(false);
    // Both are what the document's stream channel lists.
    const listed = Object.values(published.channels.liveEvents.messages as Record<string, { $ref: string }>).map((m) => published.components.messages[m.$ref.split('/').pop()!].payload.$ref);
    expect(listed).toEqual(['#/components/schemas/LiveIncidentEvent', '#/components/schemas/LiveResultEvent']);
  });
});

describe('an MQTT channel configured for QoS 2', () => {
  it('publishes with QoS 2 through the broker, and the document says a channel may', async () => {
    const prefix = `wearshift-test-${randomUUID()}`;
    const url = 'mqtt://127.0.0.1:1883';
    const env = { WEARSHIFT_WORKER_ID: randomUUID() };
    const channels = ChannelsSchema.parse({ mqtt: [{ name: 'plant-bus', url, topic: `${prefix}/{unit}/{component}/oil`, qos: 2 }] });
    const subscriber = await connectAsync(url, { clientId: `${prefix}-sub`, clean: true });
    const received: { topic: string; qos: number; payload: string }[] = [];
    subscriber.on('message', (topic, payload, packet) => received.push({ topic, qos: packet.qos, payload: payload.toString('utf8') }));
    await subscriber.subscribeAsync(`${prefix}/#`, { qos: 2 });
    const open = notificationChannels(channels, { logger: silentLogger(), env, mqttTimeoutMs: WAIT_MS });
    try {
      const effect = { channel: 'mqtt', target: 'plant-bus', incidentId: 'INC-2026-0007', at: '2026-03-01T08:05:00Z' } as NotifyEffect;
      await expect(open.deliver({ effect, message: incidentMessage(), attempt: 1 })).resolves.toBe(`mqtt plant-bus: ${prefix}/PS2-P3/gearbox/oil`);
      const until = Date.now() + WAIT_MS;
      while (received.length === 0 && Date.now() < until) await new Promise((r) => setTimeout(r, 20));
      expect(received.map((m) => [m.topic, m.qos])).toEqual([[`${prefix}/PS2-P3/gearbox/oil`, 2]]);
      const event = JSON.parse(received[0]!.payload) as { data: { advisory: string } };
      expectValid('IncidentCloudEvent', event);
      expect(event.data.advisory).toBe(ADVISORY_CAUTION);
    } finally {
      await open.close();
      await subscriber.endAsync();
      // The channel keeps a persistent session on the broker; this test's is ended.
      const publisherId = mqttClientId('plant-bus', env);
      await (await connectAsync(url, { clientId: publisherId, clean: true })).endAsync();
    }
    // The document does not pin one QoS for every channel: it names both and where a channel's is chosen.
    const operation = published.operations.publishMqtt as Json;
    expect(operation.bindings.mqtt.qos).toBeUndefined();
    expect(operation.description).toContain('QoS 1');
    expect(operation.description).toContain('QoS 2');
    expect(operation.description).toContain('channels.mqtt[].qos');
  });
});

describe('/metrics', () => {
  it('carries the caution in the HELP of the finding and alarm metrics', async () => {
    const res = await fetch(`${base}/metrics`, { headers: { authorization: `Bearer ${VIEWER}` } });
    expect(res.status).toBe(200);
    const help = (await res.text()).split('\n').filter((l) => l.startsWith('# HELP '));
    const cautioned = help.filter((l) => /^# HELP (wearshift_findings_total|wearshift_alarm_\w+) /.test(l));
    expect(cautioned.length).toBeGreaterThan(10);
    expect(cautioned.map((l) => l.split(' ')[2])).toContain('wearshift_findings_total');
    for (const line of cautioned) expect(line.endsWith(ADVISORY_CAUTION), line).toBe(true);
  });
});
