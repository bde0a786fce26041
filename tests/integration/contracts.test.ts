/**
 * The machine-readable contracts against what the code really sends. The documents themselves are checked with
 * general-purpose validators from the registry: the OpenAPI 3.1 document with @seriousme/openapi-schema-validator
 * (the OpenAPI Initiative's published schemas), the AsyncAPI 3.0 document against the official AsyncAPI 3.0.0
 * JSON Schema (@asyncapi/specs) with Ajv. Real answers of the HTTP API (over a real Redis, fetched over TCP) and real
 * deliveries (a webhook to a node:http receiver, an MQTT publish through an aedes broker) are validated with Ajv
 * against the schemas the documents give for them.
 */
import { randomBytes } from 'node:crypto';
import { mkdtempSync, readFileSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import Fastify from 'fastify';
import { createServer, type IncomingHttpHeaders, type Server } from 'node:http';
import { createServer as createTcpServer, type AddressInfo } from 'node:net';
import asyncApiSpecs from '@asyncapi/specs';
import { Validator as OpenApiValidator } from '@seriousme/openapi-schema-validator';
import { Aedes } from 'aedes';
import { connectAsync } from 'mqtt';
import { Ajv } from 'ajv';
import { Ajv2020 } from 'ajv/dist/2020.js';
import formats from 'ajv-formats';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { Step } from '../../src/analysis/model.ts';
import { ADVISORY_CAUTION } from '../../src/domain/caution.ts';
import { parseConfig } from '../../src/domain/configFile.ts';
import { asyncApiDocument } from '../../src/contracts/asyncapi.ts';
import { floodSummaryEvent, floodWindow } from '../../src/notify/floodControl.ts';
import { openApiDocument } from '../../src/contracts/openapi.ts';
import { buildServer, type WearshiftServer } from '../../src/http/server.ts';
import { incidentRules } from '../../src/incidents/policy.ts';
import type { NotifyEffect } from '../../src/incidents/model.ts';
import { createResultProducer, type ResultProducer } from '../../src/queue/producer.ts';
import { toCloudEvent } from '../../src/notify/cloudEvent.ts';
import { createMqttPublisher } from '../../src/channels/mqtt/mqttPublisher.ts';
import { deliverWebhook } from '../../src/channels/webhook/webhookDelivery.ts';
import { incidentMessage } from '../../src/notify/incidentMessage.ts';
import { RedisIncidents } from '../../src/redis/redisIncidents.ts';
import { createLogger } from '../../src/telemetry/logger.ts';
import { createMetrics } from '../../src/telemetry/metrics.ts';
import { startRedisServer, type RedisServer } from '../helpers/redisServer.ts';
import { accessTokensFromEnv } from '../../src/runtime/accessTokensFromEnv.ts';
import { seriesRoutes } from '../../src/http/seriesRoutes.ts';
import { inputOf } from '../../src/render/componentInput.ts';
import { fixtureGroup, fixtureSamples, fixtureSettings } from '../unit/chart-fixtures.ts';
import { runCli } from '../helpers/cli.ts';

/** The API's tokens, handed to the routes (never written into the process environment). */
const tokenEnv: NodeJS.ProcessEnv = {};

type Json = Record<string, any>; // eslint-disable-line @typescript-eslint/no-explicit-any

const openapi = openApiDocument() as Json;
const asyncapi = asyncApiDocument() as Json;
// ajv-formats is CommonJS: its plugin is the default export's default.
const addFormats = formats as unknown as typeof formats.default;
const ajv = new Ajv2020({ strict: false, allErrors: true });
addFormats(ajv);

/** The schema the OpenAPI document gives for an answer, resolved. */
function responseSchema(path: string, method: string, status: number): Json {
  const content = openapi.paths[path]?.[method]?.responses?.[String(status)]?.content?.['application/json'];
  if (content === undefined) throw new Error(`the OpenAPI document has no JSON answer ${status} for ${method.toUpperCase()} ${path}`);
  const ref = content.schema.$ref as string | undefined;
  return ref === undefined ? content.schema : openapi.components.schemas[ref.split('/').pop()!];
}

function expectValid(schema: Json, value: unknown, what: string): void {
  const validate = ajv.compile(schema);
  const ok = validate(value);
  expect(ok, `${what}: ${ajv.errorsText(validate.errors)}`).toBe(true);
}

const NOW = new Date();
const saved = { ...process.env };
let redis: RedisServer;
let app: WearshiftServer;
let base: string;
let producer: ResultProducer;
let incidents: RedisIncidents;
const config = parseConfig(`
escalation:
  policies:
    - name: everyone
      tiers:
        - afterMinutes: 0
          webhooks: [plant-events]
          mqtt: [plant-bus]
channels:
  webhooks:
    - { name: plant-events, url: "http://127.0.0.1:9/wearshift", secrets: [WS_CONTRACT_SECRET] }
  mqtt:
    - { name: plant-bus, url: "mqtt://127.0.0.1:1883" }
`);

function step(sampleId: string): Step {
  const sampledAt = new Date(NOW.getTime() - 3_600_000).toISOString();
  return {
    sampleId,
    sampledAt,
    findings: [{ unit: 'PS2-P3', component: 'gearbox', group: 'gearboxes', measurand: 'Fe', rule: 'cusum', disposition: 'incident', severity: 'alarm', value: 7, threshold: 5, basis: 'cusum', direction: 'up', sampleId, sampledAt, explanation: 'Fe wear rate shifted up' }],
  };
}

beforeAll(async () => {
  tokenEnv.WEARSHIFT_TOKEN_INGEST = 'ingest-c-token-61d0e3';
  tokenEnv.WEARSHIFT_TOKEN_RESPONDER = 'resp-c-token-a27f95';
  tokenEnv.WEARSHIFT_TOKEN_VIEWER = 'view-c-token-4be813';
  redis = await startRedisServer();
  const connection = redis.client();
  incidents = new RedisIncidents(connection, { rules: incidentRules(config), prefix: '{contracts}' });
  producer = createResultProducer({ connection, prefix: '{contracts}' });
  // Validating an answer compiles schemas synchronously, which on a busy machine can outlast the server's 5 s
  // keep-alive: the next fetch would then reuse a socket the server is closing (ECONNRESET). Kept alive longer here.
  app = await buildServer({
    tokens: accessTokensFromEnv(tokenEnv),
    logger: createLogger({ level: 'silent' }),
    metrics: createMetrics(),
    ping: () => connection.ping(),
    producer,
    incidents,
    openApi: openApiDocument(),
    limits: { keepAliveTimeoutMs: 120_000 },
  });
  base = await app.listen({ port: 0, host: '127.0.0.1' });
}, 120_000);

afterAll(async () => {
  process.env = saved;
  await app?.close();
  await producer?.close();
  await redis?.dispose();
});

describe('the documents', () => {
  it('the OpenAPI document is valid OpenAPI 3.1 and is served at /openapi.json', async () => {
    const result = await new OpenApiValidator().validate(openapi as never);
    expect(result).toEqual({ valid: true });
    const served = await fetch(`${base}/openapi.json`);
    expect(served.status).toBe(200);
    expect(await served.json()).toEqual(JSON.parse(JSON.stringify(openapi)));
  });

  it('the AsyncAPI document is valid against the official AsyncAPI 3.0.0 schema', () => {
    // The AsyncAPI schema bundles the draft-07 meta-schema, so Ajv's own copy is left out.
    const draft07 = new Ajv({ strict: false, allErrors: true, meta: false, validateSchema: false });
    addFormats(draft07);
    const validate = draft07.compile((asyncApiSpecs as unknown as { schemas: Record<string, object> }).schemas['3.0.0']!);
    expect(validate(asyncapi), draft07.errorsText(validate.errors)).toBe(true);
    // The validator is not a rubber stamp: a wrong operation action is refused.
    const broken = structuredClone(asyncapi);
    broken.operations.sendWebhook.action = 'broadcast';
    expect(validate(broken)).toBe(false);
  });
  it('wearshift schema writes both documents as the code generates them', async () => {
    const out = mkdtempSync(join(tmpdir(), 'wearshift-schema-'));
    try {
      const r = await runCli(['schema', '--out', out]);
      expect(r.code).toBe(0);
      expect(JSON.parse(readFileSync(join(out, 'openapi.json'), 'utf8'))).toEqual(JSON.parse(JSON.stringify(openapi)));
      expect(JSON.parse(readFileSync(join(out, 'asyncapi.json'), 'utf8'))).toEqual(JSON.parse(JSON.stringify(asyncapi)));
    } finally {
      rmSync(out, { recursive: true, force: true });
    }
  });
});

describe('real HTTP answers match the OpenAPI document', () => {
  const auth = (token: string) => ({ authorization: `Bearer ${token}`, 'content-type': 'application/json' });

  it('POST /v1/results: 202 with outcomes, 422 when none is accepted, 401 without a token', async () => {
    const good = { sampleId: 'C-1', unit: 'PS2-P3', component: 'gearbox', sampledAt: new Date(NOW.getTime() - 86_400_000).toISOString(), readings: { Fe: 12, Si: '<1' } };
    const r = await fetch(`${base}/v1/results`, { method: 'POST', headers: auth('ingest-c-token-61d0e3'), body: JSON.stringify([good, { ...good, sampleId: 'C-2', readings: { Fe: -1 } }]) });
    expect(r.status).toBe(202);
    const body = (await r.json()) as { status: string }[];
    expect(body.map((o) => o.status)).toEqual(['accepted', 'rejected']);
    expectValid(responseSchema('/v1/results', 'post', 202), body, 'POST /v1/results 202');
    // The request itself is what the document says a result event is.
    expectValid(openapi.components.schemas.ResultEvent, good, 'the result event');
    const none = await fetch(`${base}/v1/results`, { method: 'POST', headers: auth('ingest-c-token-61d0e3'), body: JSON.stringify({ ...good, unit: '' }) });
    expect(none.status).toBe(422);
    expectValid(responseSchema('/v1/results', 'post', 422), await none.json(), 'POST /v1/results 422');
    const anonymous = await fetch(`${base}/v1/results`, { method: 'POST', body: '{}', headers: { 'content-type': 'application/json' } });
    expect(anonymous.status).toBe(401);
    expectValid(responseSchema('/v1/results', 'post', 401), await anonymous.json(), 'POST /v1/results 401');
  });

  it('POST /v1/results under careless and hostile input: conflict, warnings, errors left out, too many records, too large', async () => {
    const good = { sampleId: 'C-50', unit: 'PS2-P3', component: 'gearbox', sampledAt: new Date(NOW.getTime() - 86_400_000).toISOString(), readings: { Fe: 12 } };
    // Two versions of one sampleId and revision in one request: the second is a conflict.
    const twice = await fetch(`${base}/v1/results`, { method: 'POST', headers: auth('ingest-c-token-61d0e3'), body: JSON.stringify([good, { ...good, readings: { Fe: 13 } }]) });
    const outcomes = (await twice.json()) as { status: string; conflict?: boolean }[];
    expect([twice.status, outcomes[1]?.conflict]).toEqual([202, true]);
    expectValid(responseSchema('/v1/results', 'post', 202), outcomes, 'POST /v1/results 202 with a conflict');
    // A request of conflicts only is answered 409 with the same outcomes (a stored sample is needed for that, see
    // tests/abuse/intake-hardening.test.ts): the document describes it.
    expectValid(responseSchema('/v1/results', 'post', 409), [outcomes[1]], 'POST /v1/results 409');
    // A unit name in letters that look Latin (a Cyrillic Р): accepted with a warning.
    const lookAlike = await fetch(`${base}/v1/results`, { method: 'POST', headers: auth('ingest-c-token-61d0e3'), body: JSON.stringify({ ...good, sampleId: 'C-51', unit: '\u0420S2-P3' }) });
    const warned = (await lookAlike.json()) as { warnings?: unknown[] }[];
    expect([lookAlike.status, warned[0]?.warnings?.length]).toEqual([202, 1]);
    expectValid(responseSchema('/v1/results', 'post', 202), warned, 'POST /v1/results 202 with a warning');
    // Beyond the first 100 rejected records, three problems are listed per record and the rest counted.
    const empty = await fetch(`${base}/v1/results`, { method: 'POST', headers: auth('ingest-c-token-61d0e3'), body: JSON.stringify(Array.from({ length: 120 }, () => ({}))) });
    const rejected = (await empty.json()) as { moreErrors?: number }[];
    expect([empty.status, rejected[119]!.moreErrors! > 0]).toEqual([422, true]);
    expectValid(responseSchema('/v1/results', 'post', 422), rejected, 'POST /v1/results 422 with errors left out');
    const tooMany = await fetch(`${base}/v1/results`, { method: 'POST', headers: auth('ingest-c-token-61d0e3'), body: JSON.stringify(Array.from({ length: 5001 }, () => ({}))) });
    const tooManyBody = (await tooMany.json()) as { error: string; maxRecords: number };
    expect([tooMany.status, tooManyBody.error, tooManyBody.maxRecords]).toEqual([413, 'too-many-records', 5000]);
    expectValid(responseSchema('/v1/results', 'post', 413), tooManyBody, 'POST /v1/results 413 too-many-records');
    const tooLarge = await fetch(`${base}/v1/results`, { method: 'POST', headers: auth('ingest-c-token-61d0e3'), body: JSON.stringify([{ sampleId: 'x'.repeat(6 * 1024 * 1024) }]) });
    const tooLargeBody = (await tooLarge.json()) as { maxBytes: number };
    expect([tooLarge.status, tooLargeBody.maxBytes]).toEqual([413, 5 * 1024 * 1024]);
    expectValid(responseSchema('/v1/results', 'post', 413), tooLargeBody, 'POST /v1/results 413 payload-too-large');
  });

  it('incidents: list, show, acknowledge, a bad cursor, a bad body and an unknown id', async () => {
    await incidents.applySteps({ unit: 'PS2-P3', component: 'gearbox' }, [step('C-100')], { group: 'gearboxes', now: NOW, quietBefore: new Date(0) });
    const list = await fetch(`${base}/v1/incidents`, { headers: auth('view-c-token-4be813') });
    expect(list.status).toBe(200);
    const listed = (await list.json()) as { incidents: { id: string }[] };
    expect(listed.incidents).toHaveLength(1);
    expectValid(responseSchema('/v1/incidents', 'get', 200), listed, 'GET /v1/incidents');
    expect(listed).toMatchObject({ next: null, total: 1 });
    const paged = await fetch(`${base}/v1/incidents?limit=1&cursor=not-a-cursor`, { headers: auth('view-c-token-4be813') });
    expect(paged.status).toBe(400);
    expectValid(responseSchema('/v1/incidents', 'get', 400), await paged.json(), 'GET /v1/incidents 400 (cursor)');
    const id = encodeURIComponent(listed.incidents[0]!.id);
    const show = await fetch(`${base}/v1/incidents/${id}`, { headers: auth('view-c-token-4be813') });
    expectValid(responseSchema('/v1/incidents/{id}', 'get', 200), await show.json(), 'GET /v1/incidents/{id}');
    const ack = await fetch(`${base}/v1/incidents/${id}/ack`, { method: 'POST', headers: auth('resp-c-token-a27f95'), body: JSON.stringify({ by: 'R. Tanaka', note: 'on it' }) });
    expect(ack.status).toBe(200);
    const acked = (await ack.json()) as { incident: { acknowledged: { by: string } } };
    expect(acked.incident.acknowledged.by).toBe('R. Tanaka');
    expectValid(responseSchema('/v1/incidents/{id}/ack', 'post', 200), acked, 'POST ack');
    expectValid(openapi.components.schemas.AckBody, { by: 'R. Tanaka', note: 'on it' }, 'the ack body');
    const bad = await fetch(`${base}/v1/incidents/${id}/shelve`, { method: 'POST', headers: auth('resp-c-token-a27f95'), body: JSON.stringify({ by: 'R. Tanaka' }) });
    expect(bad.status).toBe(400);
    expectValid(responseSchema('/v1/incidents/{id}/shelve', 'post', 400), await bad.json(), 'POST shelve 400');
    const missing = await fetch(`${base}/v1/incidents/${encodeURIComponent('X/y@z')}`, { headers: auth('view-c-token-4be813') });
    expect(missing.status).toBe(404);
    expectValid(responseSchema('/v1/incidents/{id}', 'get', 404), await missing.json(), 'GET 404');
  });

  it('session: the roles of a token, 401 without one', async () => {
    const session = await fetch(`${base}/v1/session`, { headers: auth('resp-c-token-a27f95') });
    expect(session.status).toBe(200);
    const body = (await session.json()) as { roles: string[] };
    expect(body.roles).toEqual(['responder']);
    expectValid(responseSchema('/v1/session', 'get', 200), body, 'GET /v1/session');
    const none = await fetch(`${base}/v1/session`);
    expect(none.status).toBe(401);
    expectValid(responseSchema('/v1/session', 'get', 401), await none.json(), 'GET /v1/session 401');
  });

  it('probes', async () => {
    const health = await fetch(`${base}/healthz`);
    expectValid(responseSchema('/healthz', 'get', 200), await health.json(), '/healthz');
    const ready = await fetch(`${base}/readyz`);
    expect(ready.status).toBe(200);
    expectValid(responseSchema('/readyz', 'get', 200), await ready.json(), '/readyz');
  });

  it('component series and charts: the answer matches the Series schema, and the query parameters the document names are the ones the routes read', async () => {
    const series = Fastify();
    await series.register(seriesRoutes, {
      tokens: accessTokensFromEnv(tokenEnv),
      loadInput: async (unit, component) =>
        unit === 'PS2-P3' && component === 'gearbox' ? inputOf({ unit, component, group: fixtureSettings().group, samples: fixtureSamples().length, lastSampledAt: '' }, fixtureSettings(), fixtureSamples(), () => fixtureGroup()) : undefined,
    });
    await series.ready();
    try {
      const path = '/v1/units/{unit}/components/{component}/series';
      const query = (p: string) => (openapi.paths[p].get.parameters as { name: string; in: string }[]).filter((x) => x.in === 'query').map((x) => x.name);
      const url = (p: string, q: string) => `${p.replace('{unit}', 'PS2-P3').replace('{component}', 'gearbox')}?${q}`;
      const [filter] = query(path);
      const one = await series.inject({ method: 'GET', url: url(path, `${filter}=Si`), headers: { authorization: 'Bearer view-c-token-4be813' } });
      expect(one.statusCode).toBe(200);
      expectValid(responseSchema(path, 'get', 200), one.json(), 'GET series');
      // The documented parameter takes effect: only the measurand asked for comes back.
      expect(one.json().measurands.map((m: { measurand: string }) => m.measurand)).toEqual(['Si']);
      const unknown = await series.inject({ method: 'GET', url: url(path, `${filter}=Xx`), headers: { authorization: 'Bearer view-c-token-4be813' } });
      expect(unknown.statusCode).toBe(400);
      expectValid(responseSchema(path, 'get', 400), unknown.json(), 'GET series 400');
      for (const chart of ['/v1/units/{unit}/components/{component}/chart.svg', '/v1/units/{unit}/components/{component}/chart.png']) {
        const names = query(chart);
        expect(names).toContain('measurand');
        const res = await series.inject({ method: 'GET', url: url(chart, 'measurand=Fe&width=640&title=none'), headers: { authorization: 'Bearer view-c-token-4be813' } });
        expect(res.statusCode).toBe(200);
        // Every parameter the route reads is documented.
        expect(names.sort()).toEqual(['measurand', 'title', 'width']);
      }
    } finally {
      await series.close();
    }
  });

  it('the schemas are strict enough to fail: an outcome with an unknown status is refused', () => {
    const validate = ajv.compile(responseSchema('/v1/results', 'post', 202));
    expect(validate([{ index: 0, status: 'maybe' }])).toBe(false);
  });
});

describe('real deliveries match the AsyncAPI document', () => {
  const payloadSchema = asyncapi.components.schemas.IncidentCloudEvent as Json;
  const headersSchema = asyncapi.components.messages.incidentEvent.headers as Json;
  let receiver: Server;
  const received: { headers: IncomingHttpHeaders; body: string }[] = [];

  beforeAll(async () => {
    receiver = createServer((req, res) => {
      const chunks: Buffer[] = [];
      req.on('data', (c: Buffer) => chunks.push(c));
      req.on('end', () => {
        received.push({ headers: req.headers, body: Buffer.concat(chunks).toString('utf8') });
        res.writeHead(204).end();
      });
    });
    await new Promise<void>((resolve) => receiver.listen(0, '127.0.0.1', () => resolve()));
  });
  afterAll(async () => {
    receiver.closeAllConnections();
    await new Promise<void>((resolve) => receiver.close(() => resolve()));
  });

  it('a webhook delivery and an MQTT publish of a real incident message', async () => {
    // Beside the evidence, a population band finding of the same sample: advisory, it opens nothing.
    const evidence = step('C-200').findings.map((f) => ({ ...f, unit: 'PS7-P1' }));
    const { direction: _up, ...opening } = evidence[0]!;
    const advisoryBand = { ...opening, measurand: 'Cu', rule: 'population', disposition: 'advisory', severity: 'caution', value: 31, threshold: 24, basis: 'reading', explanation: 'Cu above the population band' } as const;
    const result = await incidents.applySteps({ unit: 'PS7-P1', component: 'gearbox' }, [{ ...step('C-200'), findings: [...evidence, advisoryBand] }], { group: 'gearboxes', now: NOW, quietBefore: new Date(0) });
    const effects = result.effects.filter((e): e is NotifyEffect => e.kind === 'notify');
    expect(effects.map((e) => e.channel).sort()).toEqual(['mqtt', 'webhook']);
    const event = toCloudEvent(incidentMessage(effects[0]!, [], 'http://127.0.0.1:8080'), { time: effects[0]!.at });
    // The advisory finding travels in a field of its own; the evidence, and the severity it sets, stay the cusum's.
    expect(event.data.findings.map((f) => f.rule)).toEqual(['cusum']);
    expect(event.data.advisoryFindings).toEqual([{ measurand: 'Cu', subject: 'Cu', rule: 'population', severity: 'caution', value: 31, threshold: 24, basis: 'reading', sampleId: 'C-200', sampledAt: evidence[0]!.sampledAt, explanation: 'Cu above the population band' }]);
    expect(event.data.incident.severity).toBe('alarm');

    const url = `http://127.0.0.1:${(receiver.address() as AddressInfo).port}/wearshift`;
    const delivery = await deliverWebhook({ url, secrets: [`whsec_${randomBytes(32).toString('base64')}`] }, event, { now: new Date() });
    expect(delivery.outcome).toBe('delivered');
    expect(received).toHaveLength(1);
    expectValid(payloadSchema, JSON.parse(received[0]!.body), 'the webhook body');
    // Integrators pass the severity on with the caution beside it, word for word.
    expect((JSON.parse(received[0]!.body) as { data: { advisory: string } }).data.advisory).toBe(ADVISORY_CAUTION);
    expectValid(headersSchema, received[0]!.headers, 'the webhook headers');

    const aedes = await Aedes.createBroker();
    const broker = createTcpServer((socket) => aedes.handle(socket));
    await new Promise<void>((resolve) => broker.listen(0, '127.0.0.1', () => resolve()));
    const port = (broker.address() as AddressInfo).port;
    const subscriber = await connectAsync(`mqtt://127.0.0.1:${port}`, { clientId: 'contract-sub' });
    const messages: { topic: string; payload: string }[] = [];
    subscriber.on('message', (topic, payload) => messages.push({ topic, payload: payload.toString('utf8') }));
    await subscriber.subscribeAsync('plant/#', { qos: 1 });
    const publisher = createMqttPublisher({ url: `mqtt://127.0.0.1:${port}`, clientId: 'contract-pub', reconnectPeriodMs: 100 });
    try {
      const { topic } = await publisher.publish(event);
      const until = Date.now() + 60_000;
      while (messages.length === 0 && Date.now() < until) await new Promise((r) => setTimeout(r, 20));
      expect(messages).toHaveLength(1);
      // The topic follows the channel address of the document with its parameters filled in.
      expect(topic).toBe(asyncapi.channels.mqtt.address.replace('{unit}', 'PS7-P1').replace('{component}', 'gearbox'));
      expectValid(payloadSchema, JSON.parse(messages[0]!.payload), 'the MQTT payload');
      expect((JSON.parse(messages[0]!.payload) as { data: { advisory: string } }).data.advisory).toBe(ADVISORY_CAUTION);
    } finally {
      await publisher.close({ force: true });
      await subscriber.endAsync(true);
      broker.close();
      await new Promise<void>((resolve) => aedes.close(() => resolve()));
    }
    // Not a rubber stamp: a message with an unknown event type is refused, and so is one without its advisory findings.
    expect(ajv.compile(payloadSchema)({ ...event, type: 'wearshift.incident.exploded' })).toBe(false);
    const { advisoryFindings: _left, ...withoutAdvisories } = event.data;
    expect(ajv.compile(payloadSchema)({ ...event, data: withoutAdvisories })).toBe(false);
  });

  it('the alarm-flood summary as webhooks and MQTT carry it', () => {
    const summarySchema = asyncapi.components.schemas.FloodSummaryCloudEvent as Json;
    const held = (['caution', 'alarm'] as const).map((severity, i) => ({
      incidentId: `PS7-P${i + 1}/gearbox@C-20${i}`,
      unit: `PS7-P${i + 1}`,
      component: 'gearbox',
      severity,
      type: 'opened' as const,
      url: `http://127.0.0.1:8080/incidents/PS7-P${i + 1}%2Fgearbox%40C-20${i}`,
      at: new Date(NOW.getTime() + i * 60_000).toISOString(),
    }));
    const window = floodWindow(NOW.getTime(), { maxMessages: 10, windowMinutes: 10 });
    const event = floodSummaryEvent({ channel: 'webhook', target: 'plant-events', window: { from: new Date(window.startsAt).toISOString(), until: new Date(window.endsAt).toISOString() }, maxMessages: 10, held }, window.index);
    expectValid(summarySchema, JSON.parse(JSON.stringify(event)), 'the flood summary');
    expect(event.data.held.map((h) => h.severity)).toEqual(['alarm', 'caution']);
    expect(event.data.advisory).toBe(ADVISORY_CAUTION);
    expect(ajv.compile(summarySchema)({ ...event, data: { ...event.data, held: [] } })).toBe(false);
    // Both channels list it beside the incident events.
    expect(Object.keys(asyncapi.channels.webhook.messages)).toEqual(['incidentEvent', 'floodSummary']);
    expect(Object.keys(asyncapi.channels.mqtt.messages)).toEqual(['incidentEvent', 'floodSummary']);
  });
});
