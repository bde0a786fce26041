/**
 * The API under hostile load over a real port on 127.0.0.1, with a private redis-server: record caps per request,
 * problems per record bounded however wide the record, slow bodies and idle sockets cut off (with and without a token), incident ids of the longest valid length acted
 * on, slow live-event clients dropped and their number capped, secrets kept out of the captured log, who
 * acknowledged recorded by credential, and 503 with Retry-After while Redis is away. Each attack runs beside a
 * /healthz poller; memory and probe latency are measured and bounded generously (a busy two-core machine).
 * Assertions are on bounded behaviour (status codes, closed sockets, reply sizes), never on speed.
 */
import { connect, type Socket } from 'node:net';
import { Writable } from 'node:stream';
import type { AddressInfo } from 'node:net';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { ConfigSchema } from '../../src/domain/config.ts';
import { createEventHub, type EventHub, type LiveEvent } from '../../src/http/eventHub.ts';
import { buildServer, type WearshiftServer } from '../../src/http/server.ts';
import { incidentRules } from '../../src/incidents/policy.ts';
import { createResultProducer, type ResultProducer } from '../../src/queue/producer.ts';
import { signAckLink } from '../../src/notify/ackLink.ts';
import { connectRedis, type RedisConnection } from '../../src/redis/connection.ts';
import { RedisIncidents } from '../../src/redis/redisIncidents.ts';
import type { Queue } from 'bullmq';
import { parseConfig } from '../../src/domain/configFile.ts';
import { serviceLogger } from '../../src/runtime/runService.ts';
import { createMetrics } from '../../src/telemetry/metrics.ts';
import { historyParts, openAlarmIncident } from '../helpers/apiParts.ts';
import { startRedisServer, type RedisServer } from '../helpers/redisServer.ts';
import { healthProbe } from '../helpers/healthProbe.ts';
import { accessTokensFromEnv } from '../../src/runtime/accessTokensFromEnv.ts';

const prefix = '{hostile}';
const TOKENS = { ingest: 'ingest-hostile-5d1c2e8a', responder: 'responder-hostile-9b3f7a61', viewer: 'viewer-hostile-27c4e0d9' };
const ACK_SECRET = 'ack-secret-hostile-3e8f1a0b2c';
/** The credentials a configuration names (environment variables, a literal webhook secret): none may reach the log. */
const CONFIG_SECRETS = {
  HOSTILE_SMTP_PASSWORD: 'smtp-password-hostile-8c1d',
  HOSTILE_WEBHOOK_SECRET: 'webhook-secret-hostile-f07a2e',
  HOSTILE_MQTT_PASSWORD: 'mqtt-password-hostile-41bb',
  HOSTILE_ACK_SECRET: ACK_SECRET,
};
const LITERAL_WEBHOOK_SECRET = 'whsec_aG9zdGlsZS1saXRlcmFsLXNlY3JldCEh';
const SERVICE_CONFIG = parseConfig(`
channels:
  email:
    from: "wearshift <alerts@plant.example>"
    smtp: { host: 127.0.0.1, port: 2525, user: alerts, passwordEnv: HOSTILE_SMTP_PASSWORD }
  webhooks:
    - { name: control-room, url: "http://127.0.0.1:9/hooks", secrets: [HOSTILE_WEBHOOK_SECRET, "${LITERAL_WEBHOOK_SECRET}"] }
  mqtt:
    - { name: plant-broker, url: "mqtt://127.0.0.1:1883", username: wearshift, passwordEnv: HOSTILE_MQTT_PASSWORD }
  ackLinks: { baseUrl: "https://wearshift.plant.example", secretEnv: HOSTILE_ACK_SECRET }
`);
const NOW = new Date();
const LIMITS = {
  maxRecordsPerRequest: 500,
  requestTimeoutMs: 3000,
  headersTimeoutMs: 2000,
  keepAliveTimeoutMs: 1000,
  timeoutCheckIntervalMs: 250,
  maxEventClients: 8,
  maxEventBufferBytes: 64 * 1024,
};
/** Generous bounds: a busy shared machine, never the speed of this one. */
const DISCONNECT_WITHIN_MS = 60_000;
// /healthz answers while an attack runs: bounded for a loaded two-core machine (2.4 s seen with two suites and other
// jobs beside), yet far below what the attacks did before their fixes (a 16 s stall, refused for two minutes, 262 s).
const HEALTHZ_MAX_MS = 10_000;
const MEMORY_GROWTH_MAX = 300 * 1024 * 1024;

// The longest ids the schema allows: unit, component and sampleId of 80 characters each (242 characters), the unit
// in CJK letters (3 bytes of UTF-8, 9 characters percent-encoded) so that the path is far over the router's former
// limit of 100.
const LONG_UNIT = '漢'.repeat(80);
const LONG_COMPONENT = 'c'.repeat(80);
const LONG_SAMPLE = 'S'.repeat(80);
const LONG_ID = `${LONG_UNIT}/${LONG_COMPONENT}@${LONG_SAMPLE}`;
const SHORT_ID = 'PS7-Quarry Road/gearbox@LAB-7001';

let redis: RedisServer;
let request: RedisConnection;
let app: WearshiftServer;
let base: string;
let host: { host: string; port: number };
let hub: EventHub;
let producer: ResultProducer;
let evaluateQueues: Queue[] = [];
let redisGone = false;
const logLines: string[] = [];
const saved = { ...process.env };


beforeAll(async () => {
  redis = await startRedisServer();
  Object.assign(process.env, { WEARSHIFT_TOKEN_INGEST: TOKENS.ingest, WEARSHIFT_TOKEN_RESPONDER: TOKENS.responder, WEARSHIFT_TOKEN_VIEWER: TOKENS.viewer });
  request = connectRedis(`redis://127.0.0.1:${redis.port}`, 'request');
  request.on('error', () => {});
  await new Promise((resolve) => request.once('ready', resolve));
  const incidents = new RedisIncidents(request, { rules: incidentRules(ConfigSchema.parse({})), prefix });
  await openAlarmIncident(incidents, LONG_UNIT, LONG_COMPONENT, LONG_SAMPLE, NOW);
  await openAlarmIncident(incidents, 'PS7-Quarry Road', 'gearbox', 'LAB-7001', NOW);
  producer = createResultProducer({ connection: request, prefix });
  hub = createEventHub();
  const parts = historyParts(request, prefix);
  evaluateQueues = parts.evaluateQueues;
  const capture = new Writable({
    write(chunk, _encoding, done) {
      logLines.push(String(chunk));
      done();
    },
  });
  app = await buildServer({ tokens: accessTokensFromEnv(process.env),
    // The logger `wearshift serve` makes for this configuration (src/runtime/runService.ts).
    logger: serviceLogger('serve', SERVICE_CONFIG, { ...process.env, ...CONFIG_SECRETS }, capture),
    metrics: createMetrics({ defaultMetrics: false }),
    ping: () => request.ping(),
    producer,
    incidents,
    ...parts.server,
    hub,
    ackLinkSecrets: [ACK_SECRET],
    limits: LIMITS,
  });
  base = await app.listen({ host: '127.0.0.1', port: 0 });
  host = { host: '127.0.0.1', port: (app.server.address() as AddressInfo).port };
}, 60_000);

afterAll(async () => {
  process.env = saved;
  await app?.close();
  await producer?.close();
  await Promise.all(evaluateQueues.map((q) => q.close()));
  request?.disconnect();
  if (!redisGone) await redis?.dispose();
});

const auth = (role: keyof typeof TOKENS) => ({ authorization: `Bearer ${TOKENS[role]}` });

const startProbe = () => healthProbe(base, 100);

/** A raw socket that records what the server sent and when it closed the connection. */
function rawSocket(): { socket: Socket; received: () => string; closed: Promise<void> } {
  const socket = connect(host);
  socket.on('error', () => {});
  let text = '';
  socket.on('data', (d) => (text += d.toString('latin1')));
  const closed = new Promise<void>((resolve) => socket.once('close', () => resolve()));
  return { socket, received: () => text, closed };
}

const within = <T,>(p: Promise<T>, ms: number, what: string) =>
  Promise.race([p, new Promise<never>((_, reject) => setTimeout(() => reject(new Error(`${what}: not within ${ms} ms`)), ms).unref())]);

describe('records per request', () => {
  it('refuses more records than the cap with 413 naming it, and the reply does not grow with the garbage sent', async () => {
    const rssBefore = process.memoryUsage().rss;
    const probe = startProbe();
    const tooMany = await fetch(`${base}/v1/results`, { method: 'POST', headers: { ...auth('ingest'), 'content-type': 'application/json' }, body: JSON.stringify(Array.from({ length: 501 }, () => ({}))) });
    expect(tooMany.status).toBe(413);
    const body = (await tooMany.json()) as { error: string; message: string; maxRecords: number };
    expect(body.maxRecords).toBe(500);
    expect(body.message).toContain('more than the limit of 500 per request');

    // 100 000 empty records in NDJSON (about 0.3 MB): refused whole, a reply of a few hundred bytes.
    const lines = '{}\n'.repeat(100_000);
    const flood = await fetch(`${base}/v1/results`, { method: 'POST', headers: { ...auth('ingest'), 'content-type': 'application/x-ndjson' }, body: lines });
    expect(flood.status).toBe(413);
    expect((await flood.text()).length).toBeLessThan(1000);
    // Zeros in a JSON array: the same.
    const zeros = await fetch(`${base}/v1/results`, { method: 'POST', headers: { ...auth('ingest'), 'content-type': 'application/json' }, body: `[${Array(200_000).fill('0').join(',')}]` });
    expect(zeros.status).toBe(413);

    // At the cap, every record gets its outcome, but the reply is bounded per record.
    const atCap = await fetch(`${base}/v1/results`, { method: 'POST', headers: { ...auth('ingest'), 'content-type': 'application/json' }, body: JSON.stringify(Array.from({ length: 500 }, () => ({}))) });
    expect(atCap.status).toBe(422);
    const text = await atCap.text();
    const outcomes = JSON.parse(text) as { index: number; status: string; errors: unknown[]; moreErrors?: number }[];
    expect(outcomes).toHaveLength(500);
    expect(outcomes.every((o) => o.status === 'rejected' && o.errors.length > 0)).toBe(true);
    expect(outcomes[499]!.errors.length).toBeLessThanOrEqual(3);
    expect(text.length).toBeLessThan(500 * 400);
    const health = await probe.stop();
    expect(health.failures).toEqual([]);
    expect(health.slowest).toBeLessThan(HEALTHZ_MAX_MS);
    expect(process.memoryUsage().rss - rssBefore).toBeLessThan(MEMORY_GROWTH_MAX);
  }, 120_000);
});

describe('problems per record', () => {
  it('stay bounded however wide a record is: readings over the catalogue refused on their count, at most 20 problems listed', async () => {
    const rssBefore = process.memoryUsage().rss;
    const probe = startProbe();
    const record = { sampleId: 'WIDE-1', unit: 'PS7', component: 'gearbox', sampledAt: NOW.toISOString() };
    // 300 000 unknown measurands in one record (about 4 MB): one problem naming the field and the count.
    const readings = Object.fromEntries(Array.from({ length: 300_000 }, (_, i) => [`m${i}`, i]));
    const body = JSON.stringify({ ...record, readings });
    expect(body.length).toBeGreaterThan(3_000_000);
    const wide = await fetch(`${base}/v1/results`, { method: 'POST', headers: { ...auth('ingest'), 'content-type': 'application/json' }, body });
    expect(wide.status).toBe(422);
    const text = await wide.text();
    expect(text.length).toBeLessThan(2000);
    expect(JSON.parse(text)).toEqual([{ index: 0, sampleId: 'WIDE-1', status: 'rejected', errors: [{ path: 'readings', reason: expect.stringMatching(/^readings hold 300000 entries, more than the \d+ measurands of the catalogue/) }] }]);
    // Within the catalogue's size but every entry wrong: the first 20 listed, the rest counted.
    const wrong = Object.fromEntries(Array.from({ length: 30 }, (_, i) => [`Zz${i}`, 1]));
    const many = await fetch(`${base}/v1/results`, { method: 'POST', headers: { ...auth('ingest'), 'content-type': 'application/json' }, body: JSON.stringify({ ...record, sampleId: 'WIDE-2', readings: wrong }) });
    expect(many.status).toBe(422);
    const [outcome] = (await many.json()) as { errors: { path: string }[]; moreErrors?: number }[];
    expect(outcome!.errors).toHaveLength(20);
    expect(outcome!.errors[0]!.path).toBe('readings.Zz0');
    expect(outcome!.moreErrors).toBe(10);
    const health = await probe.stop();
    expect(health.failures).toEqual([]);
    expect(health.slowest).toBeLessThan(HEALTHZ_MAX_MS);
    expect(process.memoryUsage().rss - rssBefore).toBeLessThan(MEMORY_GROWTH_MAX);
  }, 120_000);
});

describe('timeouts', () => {
  it('cuts off slow bodies, with and without a token, and sockets that never send a request', async () => {
    const rssBefore = process.memoryUsage().rss;
    const probe = startProbe();
    const sockets: ReturnType<typeof rawSocket>[] = [];
    const drip: NodeJS.Timeout[] = [];
    const slowPost = (headers: string) => {
      const s = rawSocket();
      s.socket.write(`POST /v1/results HTTP/1.1\r\nHost: 127.0.0.1\r\nContent-Type: application/json\r\nContent-Length: 1000000\r\n${headers}\r\n[`);
      // A byte every 200 ms: the whole body would take days.
      drip.push(setInterval(() => s.socket.destroyed || s.socket.write(' '), 200));
      return s;
    };
    const withToken = Array.from({ length: 30 }, () => slowPost(`Authorization: Bearer ${TOKENS.ingest}\r\n`));
    const withoutToken = Array.from({ length: 30 }, () => slowPost(''));
    const idle = Array.from({ length: 30 }, () => rawSocket());
    sockets.push(...withToken, ...withoutToken, ...idle);
    try {
      await within(Promise.all(sockets.map((s) => s.closed)), DISCONNECT_WITHIN_MS, 'every slow or idle socket closed by the server');
    } finally {
      drip.forEach(clearInterval);
      sockets.forEach((s) => s.socket.destroy());
    }
    // The refused ones got their 401 before the socket was closed, though they kept sending.
    for (const s of withoutToken) expect(s.received()).toMatch(/^HTTP\/1\.1 401 /);
    for (const s of withoutToken) expect(s.received().toLowerCase()).toContain('connection: close');
    const health = await probe.stop();
    expect(health.failures).toEqual([]);
    expect(health.answered).toBeGreaterThan(0);
    expect(health.slowest).toBeLessThan(HEALTHZ_MAX_MS);
    expect(process.memoryUsage().rss - rssBefore).toBeLessThan(MEMORY_GROWTH_MAX);
  }, 120_000);
});

describe('incident ids of the longest valid length', () => {
  it('can be shown and acknowledged, and the acknowledging token is recorded', async () => {
    expect(LONG_ID.length).toBe(242);
    const path = `/v1/incidents/${encodeURIComponent(LONG_ID)}`;
    expect(path.length).toBeGreaterThan(800);
    const show = await fetch(`${base}${path}`, { headers: auth('viewer') });
    expect(show.status).toBe(200);
    expect(((await show.json()) as { incident: { id: string } }).incident.id).toBe(LONG_ID);
    const ack = await fetch(`${base}${path}/ack`, { method: 'POST', headers: { ...auth('responder'), 'content-type': 'application/json' }, body: JSON.stringify({ by: 'anyone at all' }) });
    expect(ack.status).toBe(200);
    const { incident } = (await ack.json()) as { incident: { acknowledged: { by: string; credential?: string }; timeline: { kind: string; credential?: string }[] } };
    // The typed name is any text; the credential says which token acted (its role and digest prefix, not the token).
    expect(incident.acknowledged.by).toBe('anyone at all');
    expect(incident.acknowledged.credential).toMatch(/^responder token [0-9a-f]{8}$/);
    expect(incident.timeline.find((e) => e.kind === 'acknowledged')?.credential).toBe(incident.acknowledged.credential);
    expect(JSON.stringify(incident)).not.toContain(TOKENS.responder);
  });

  it('through an e-mail link, record the signed recipient beside the typed name', async () => {
    const token = signAckLink({ incidentId: SHORT_ID, recipient: 'oncall@plant.example', expiresAt: new Date(Date.now() + 3_600_000) }, ACK_SECRET);
    const page = await fetch(`${base}/ack/${token}`);
    expect(page.status).toBe(200);
    const done = await fetch(`${base}/ack/${token}`, { method: 'POST', headers: { 'content-type': 'application/x-www-form-urlencoded' }, body: 'name=Somebody+Typed+This' });
    expect(done.status).toBe(200);
    const show = await fetch(`${base}/v1/incidents/${encodeURIComponent(SHORT_ID)}`, { headers: auth('viewer') });
    const { incident } = (await show.json()) as { incident: { acknowledged: { by: string; recipient?: string; credential?: string } } };
    expect(incident.acknowledged).toMatchObject({ by: 'Somebody Typed This', recipient: 'oncall@plant.example', credential: 'e-mail link to oncall@plant.example' });
  });
});

describe('live-event clients', () => {
  it('are capped in number and cut off when they fall behind, while the API keeps answering', async () => {
    const rssBefore = process.memoryUsage().rss;
    const probe = startProbe();
    const clients = Array.from({ length: LIMITS.maxEventClients }, () => {
      const s = rawSocket();
      s.socket.write(`GET /v1/events HTTP/1.1\r\nHost: 127.0.0.1\r\nAuthorization: Bearer ${TOKENS.viewer}\r\n\r\n`);
      // Never reads: the kernel buffers fill, then the server's.
      s.socket.pause();
      return s;
    });
    const deadline = Date.now() + DISCONNECT_WITHIN_MS;
    while (hub.subscribers < LIMITS.maxEventClients && Date.now() < deadline) await new Promise((r) => setTimeout(r, 50));
    expect(hub.subscribers).toBe(LIMITS.maxEventClients);
    const extra = await fetch(`${base}/v1/events`, { headers: auth('viewer') });
    expect(extra.status).toBe(503);
    expect(extra.headers.get('retry-after')).not.toBeNull();

    // Large events until every stalled client is dropped (or the generous deadline passes).
    const padding = 'x'.repeat(16 * 1024);
    let published = 0;
    while (hub.subscribers > 0 && Date.now() < deadline) {
      for (let i = 0; i < 20; i++) hub.publish({ type: 'result', unit: 'PS7', component: 'gearbox', sampleId: padding, sampledAt: NOW.toISOString() } as LiveEvent);
      published += 20;
      await new Promise((r) => setTimeout(r, 5));
    }
    expect(hub.subscribers).toBe(0);
    // More was published to each client than the cap: they were dropped, not fed without bound.
    expect(published * padding.length).toBeGreaterThan(LIMITS.maxEventBufferBytes);
    clients.forEach((c) => c.socket.destroy());
    const health = await probe.stop();
    expect(health.failures).toEqual([]);
    expect(health.slowest).toBeLessThan(HEALTHZ_MAX_MS);
    expect(process.memoryUsage().rss - rssBefore).toBeLessThan(MEMORY_GROWTH_MAX);
  }, 120_000);
});

describe('secrets in the log', () => {
  it('never carry an acknowledgement token, a token query, an API token or a credential the configuration names', async () => {
    const link = signAckLink({ incidentId: SHORT_ID, recipient: 'second@plant.example', expiresAt: new Date(Date.now() + 3_600_000) }, ACK_SECRET);
    const forged = `${link.slice(0, 12)}${link[12] === 'A' ? 'B' : 'A'}${link.slice(13)}`;
    await (await fetch(`${base}/ack/${link}`)).text();
    await (await fetch(`${base}/ack/${link}`, { method: 'POST', headers: { 'content-type': 'application/x-www-form-urlencoded' }, body: 'name=X' })).text();
    await (await fetch(`${base}/ack/${forged}`)).text();
    await (await fetch(`${base}/v1/events?token=${TOKENS.viewer}`)).text();
    await (await fetch(`${base}/v1/incidents?token=query-secret-0a9b8c7d`)).text();
    await (await fetch(`${base}/v1/incidents/${TOKENS.responder}`, { headers: auth('viewer') })).text();
    // Something that logs a header value or an error holding one.
    app.log.warn({ upstream: `Bearer ${TOKENS.ingest}` }, `forwarded with Authorization: Bearer ${TOKENS.ingest}`);
    // A channel or library error that quotes a configured credential in its text (not in a field named as secret).
    for (const secret of [...Object.values(CONFIG_SECRETS), LITERAL_WEBHOOK_SECRET]) app.log.error({ err: { message: `login refused for ${secret}` }, detail: [`auth=${secret}`] }, `delivery failed: ${secret}`);
    await new Promise((r) => setTimeout(r, 200));
    const log = logLines.join('');
    // The requests were logged (so the check below means something), with the secret parts replaced.
    expect(log).toContain('/ack/[redacted]');
    expect(log).toContain('token=[redacted]');
    expect(log).toContain('delivery failed: [redacted]');
    const secrets = [link, forged, link.split('.')[0]!, link.split('.')[1]!, 'query-secret-0a9b8c7d', ...Object.values(TOKENS), ...Object.values(CONFIG_SECRETS), LITERAL_WEBHOOK_SECRET];
    for (const secret of secrets) expect(log, secret).not.toContain(secret);
  });
});

describe('Redis away', () => {
  it('answers 503 with Retry-After on every route that needs it, not 500 with the client message', async () => {
    await redis.dispose();
    redisGone = true;
    const deadline = Date.now() + 30_000;
    while (request.status === 'ready' && Date.now() < deadline) await new Promise((r) => setTimeout(r, 50));
    const incident = `/v1/incidents/${encodeURIComponent(SHORT_ID)}`;
    const component = '/v1/units/PS7-Quarry%20Road/components/gearbox';
    const json = (role: keyof typeof TOKENS, body: unknown): RequestInit => ({ method: 'POST', headers: { ...auth(role), 'content-type': 'application/json' }, body: JSON.stringify(body) });
    const link = signAckLink({ incidentId: SHORT_ID, recipient: 'away@plant.example', expiresAt: new Date(Date.now() + 3_600_000) }, ACK_SECRET);
    // Every route of the server that reads or writes Redis (src/http/*Routes.ts); the token-free board pages,
    // /healthz, /openapi.json and /v1/events do not touch it.
    const routes: [string, string, RequestInit][] = [
      ['GET', '/v1/incidents', { headers: auth('viewer') }],
      ['GET', incident, { headers: auth('viewer') }],
      ['POST', `${incident}/note`, json('responder', { by: 'R. Tanaka', note: 'checking' })],
      ['POST', `${incident}/ack`, json('responder', { by: 'R. Tanaka' })],
      ['POST', `${incident}/shelve`, json('responder', { by: 'R. Tanaka', until: new Date(Date.now() + 3_600_000).toISOString(), reason: 'awaiting resample' })],
      ['POST', `${incident}/unshelve`, json('responder', { by: 'R. Tanaka' })],
      ['POST', `${incident}/resolve`, json('responder', { by: 'R. Tanaka', note: 'filter changed' })],
      ['POST', '/v1/results', json('ingest', { sampleId: 'X-1', unit: 'PS7', component: 'gearbox', sampledAt: NOW.toISOString(), readings: { Fe: 1 } })],
      ['GET', `${component}/series`, { headers: auth('viewer') }],
      ['GET', `${component}/series?measurand=Fe&measurand=Cu`, { headers: auth('viewer') }],
      ['GET', `${component}/chart.svg?measurand=Fe`, { headers: auth('viewer') }],
      ['GET', `${component}/chart.png?measurand=Fe`, { headers: auth('viewer') }],
      ['POST', `${component}/samples/LAB-7001/verdict`, json('responder', { verdict: 'confirmed', by: 'R. Tanaka' })],
      ['GET', `/ack/${link}`, {}],
      ['POST', `/ack/${link}`, { method: 'POST', headers: { 'content-type': 'application/x-www-form-urlencoded' }, body: 'name=R.+Tanaka' }],
      ['GET', '/readyz', {}],
    ];
    for (const [method, path, init] of routes) {
      const res = await fetch(`${base}${path}`, { method, ...init });
      const text = await res.text();
      expect(`${method} ${path} ${res.status}`).toBe(`${method} ${path} 503`);
      if (path !== '/readyz') expect(res.headers.get('retry-after')).toMatch(/^\d+$/);
      expect(text).not.toMatch(/enableOfflineQueue|Stream isn't writeable|ECONNREFUSED|Connection is closed/);
    }
  }, 60_000);
});
