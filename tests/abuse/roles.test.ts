/**
 * Every route of the full HTTP API (buildServer with intake, incidents, histories, live events, board and
 * acknowledgement links) against every kind of caller: no token, an unknown token, and a token of each role.
 * A role may do its own operations only: 401 without a known token (RFC 6750 §3), 403 for a known token
 * without the role. A route added without an entry here fails the completeness check.
 * (Detailed role cases per route group: tests/integration/http.test.ts and incidentRoutes.test.ts.)
 */
import type { AddressInfo } from 'node:net';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { Step } from '../../src/analysis/model.ts';
import { parseConfig } from '../../src/domain/configFile.ts';
import { createEventHub } from '../../src/http/eventHub.ts';
import { buildServer, type WearshiftServer } from '../../src/http/server.ts';
import { incidentRules } from '../../src/incidents/policy.ts';
import { RedisIncidents as RedisIncidentStore } from '../../src/redis/redisIncidents.ts';
import { createResultProducer, type ResultProducer } from '../../src/queue/producer.ts';
import { signAckLink } from '../../src/notify/ackLink.ts';
import { storeResult } from '../../src/pipeline/storeResult.ts';
import { silentLogger } from '../../src/telemetry/logger.ts';
import { createMetrics } from '../../src/telemetry/metrics.ts';
import { RedisStore } from '../../src/redis/redisStore.ts';
import { startRedisServer, type RedisServer } from '../helpers/redisServer.ts';
import { accessTokensFromEnv } from '../../src/runtime/accessTokensFromEnv.ts';

/** The API's tokens, handed to the routes (never written into the process environment). */
const tokenEnv: NodeJS.ProcessEnv = {};

const prefix = '{roles}';
const TOKENS = { ingest: 'ingest-tok-3b81f0', responder: 'responder-tok-c4d2e9', viewer: 'viewer-tok-77a1b5' } as const;
const CALLERS = ['none', 'unknown', 'ingest', 'responder', 'viewer'] as const;
type Caller = (typeof CALLERS)[number];
const ACK_SECRET = 'roles-ack-secret-0123456789abcdef';
const UNIT = 'PS2-P3';
const COMPONENT = 'gearbox';
const ID = `${UNIT}/${COMPONENT}@LAB-0100`;
const OTHER_ID = `PS2-P4/${COMPONENT}@LAB-0100`;

let redis: RedisServer;
let store: RedisIncidentStore;
let app: WearshiftServer;
let base: string;
let producer: ResultProducer;
const saved = { ...process.env };

beforeAll(async () => {
  redis = await startRedisServer();
  const client = redis.client();
  const config = parseConfig(`redis: { prefix: "${prefix}" }`);
  const incidents = new RedisIncidentStore(client, { rules: incidentRules(config), prefix });
  store = incidents;
  const storage = new RedisStore(client, { prefix, config });
  const sampledAt = new Date(Date.now() - 86_400_000).toISOString();
  await storeResult(storage, config, { sampleId: 'LAB-0100', unit: UNIT, component: COMPONENT, sampledAt, oilHours: 250, readings: { Fe: 80 } }, Date.now());
  const step: Step = {
    sampleId: 'LAB-0100',
    sampledAt,
    findings: [{ unit: UNIT, component: COMPONENT, group: COMPONENT, measurand: 'Fe', rule: 'limit', disposition: 'incident', severity: 'alarm', value: 80, threshold: 70, basis: 'reading', sampleId: 'LAB-0100', sampledAt, explanation: 'Fe 80 ppm is above the alarm level of 70 ppm.' }],
  };
  await incidents.applySteps({ unit: UNIT, component: COMPONENT }, [step], { group: COMPONENT, now: new Date(), quietBefore: new Date(0) });
  expect(await incidents.get(ID)).toBeDefined();
  // A second incident that no route of the matrix touches, for the acknowledgement links.
  const other = { ...step, findings: step.findings.map((f) => ({ ...f, unit: 'PS2-P4' })) };
  await incidents.applySteps({ unit: 'PS2-P4', component: COMPONENT }, [other], { group: COMPONENT, now: new Date(), quietBefore: new Date(0) });
  expect(await incidents.get(OTHER_ID)).toBeDefined();

  tokenEnv.WEARSHIFT_TOKEN_INGEST = TOKENS.ingest;
  tokenEnv.WEARSHIFT_TOKEN_RESPONDER = TOKENS.responder;
  tokenEnv.WEARSHIFT_TOKEN_VIEWER = TOKENS.viewer;
  delete process.env.WEARSHIFT_METRICS_PUBLIC;
  producer = createResultProducer({ connection: client, prefix });
  app = await buildServer({ tokens: accessTokensFromEnv(tokenEnv),
    logger: silentLogger(),
    metrics: createMetrics({ defaultMetrics: false }),
    ping: () => client.ping(),
    producer,
    incidents,
    histories: { store: storage, ledger: storage, config },
    hub: createEventHub(),
    ackLinkSecrets: [ACK_SECRET],
  });
  await app.listen({ port: 0, host: '127.0.0.1' });
  base = `http://127.0.0.1:${(app.server.address() as AddressInfo).port}`;
});

afterAll(async () => {
  process.env = saved;
  await app?.close();
  await producer?.close();
  await redis?.dispose();
});

interface Route {
  method: 'GET' | 'POST';
  /** The route as registered. */
  route: string;
  /** A concrete URL of it. */
  url: string;
  body?: unknown;
  /** Who may: 'public' for everyone, 'any-token' for every known token, else the roles. */
  allowed: 'public' | 'any-token' | readonly ('ingest' | 'responder' | 'viewer')[];
  /** The status an allowed caller gets. */
  ok: number;
}

const C = `/v1/units/${encodeURIComponent(UNIT)}/components/${COMPONENT}`;
const I = `/v1/incidents/${encodeURIComponent(ID)}`;
const READERS = ['viewer', 'responder'] as const;
const event = { sampleId: 'LAB-0200', unit: UNIT, component: COMPONENT, sampledAt: '2026-01-05T08:00:00Z', readings: { Fe: 12 } };
const by = { by: 'R. Okafor' };

/** Order matters for the responder's actions: acknowledge, shelve, unshelve, note, and resolve last. */
const ROUTES: Route[] = [
  { method: 'GET', route: '/', url: '/', allowed: 'public', ok: 200 },
  { method: 'GET', route: '/units/:unit/components/:component', url: `/units/${encodeURIComponent(UNIT)}/components/${COMPONENT}`, allowed: 'public', ok: 200 },
  { method: 'GET', route: '/board/:name', url: '/board/board.js', allowed: 'public', ok: 200 },
  { method: 'GET', route: '/healthz', url: '/healthz', allowed: 'public', ok: 200 },
  { method: 'GET', route: '/readyz', url: '/readyz', allowed: 'public', ok: 200 },
  { method: 'GET', route: '/metrics', url: '/metrics', allowed: READERS, ok: 200 },
  { method: 'GET', route: '/v1/session', url: '/v1/session', allowed: 'any-token', ok: 200 },
  { method: 'POST', route: '/v1/results', url: '/v1/results', body: event, allowed: ['ingest'], ok: 202 },
  { method: 'GET', route: '/v1/events', url: '/v1/events', allowed: READERS, ok: 200 },
  { method: 'GET', route: '/v1/units/:unit/components/:component/series', url: `${C}/series`, allowed: READERS, ok: 200 },
  { method: 'GET', route: '/v1/units/:unit/components/:component/chart.svg', url: `${C}/chart.svg?measurand=Fe`, allowed: READERS, ok: 200 },
  { method: 'GET', route: '/v1/units/:unit/components/:component/chart.png', url: `${C}/chart.png?measurand=Fe`, allowed: READERS, ok: 200 },
  { method: 'GET', route: '/v1/incidents', url: '/v1/incidents', allowed: READERS, ok: 200 },
  { method: 'GET', route: '/v1/incidents/:id', url: I, allowed: READERS, ok: 200 },
  { method: 'POST', route: '/v1/incidents/:id/ack', url: `${I}/ack`, body: by, allowed: ['responder'], ok: 200 },
  { method: 'POST', route: '/v1/incidents/:id/shelve', url: `${I}/shelve`, body: { ...by, until: new Date(Date.now() + 2 * 3_600_000).toISOString(), reason: 'pump swap' }, allowed: ['responder'], ok: 200 },
  { method: 'POST', route: '/v1/incidents/:id/unshelve', url: `${I}/unshelve`, body: by, allowed: ['responder'], ok: 200 },
  { method: 'POST', route: '/v1/incidents/:id/note', url: `${I}/note`, body: { ...by, note: 'sampled again' }, allowed: ['responder'], ok: 200 },
  { method: 'POST', route: '/v1/incidents/:id/resolve', url: `${I}/resolve`, body: { ...by, note: 'bearing replaced' }, allowed: ['responder'], ok: 200 },
];

function expected(route: Route, caller: Caller): number {
  if (route.allowed === 'public') return route.ok;
  if (caller === 'none' || caller === 'unknown') return 401;
  if (route.allowed === 'any-token') return route.ok;
  return route.allowed.includes(caller) ? route.ok : 403;
}

async function call(route: Route, caller: Caller): Promise<{ status: number; body: string; challenge: string | null }> {
  const headers: Record<string, string> = {};
  if (caller === 'unknown') headers.authorization = 'Bearer not-a-token-of-ours';
  else if (caller !== 'none') headers.authorization = `Bearer ${TOKENS[caller]}`;
  if (route.body !== undefined) headers['content-type'] = 'application/json';
  const abort = new AbortController();
  const res = await fetch(`${base}${route.url}`, { method: route.method, headers, signal: abort.signal, ...(route.body !== undefined && { body: JSON.stringify(route.body) }) });
  // The event stream never ends by itself: the status and headers are what this test needs.
  const body = res.headers.get('content-type')?.startsWith('text/event-stream') ? '' : await res.text();
  abort.abort();
  return { status: res.status, body, challenge: res.headers.get('www-authenticate') };
}

describe('role matrix over every route', () => {
  it('lists every route the server has', () => {
    const tree = app.printRoutes({ commonPrefix: false });
    // One entry per method, HEAD aside (fastify adds it to every GET).
    const registered = [...tree.matchAll(/\(([A-Z, ]+)\)/g)].flatMap((m) => m[1]!.split(', ')).filter((m) => m !== 'HEAD');
    const ack = [{ method: 'GET', route: '/ack/*' }, { method: 'POST', route: '/ack/*' }];
    for (const r of [...ROUTES, ...ack]) expect(app.hasRoute({ method: r.method as 'GET' | 'POST', url: r.route }), `${r.method} ${r.route}`).toBe(true);
    expect(registered.length, `routes registered:\n${tree}`).toBe(ROUTES.length + ack.length);
  });

  for (const caller of CALLERS) {
    it(`${caller === 'none' ? 'no token' : caller === 'unknown' ? 'an unknown token' : `the ${caller} role`}: exactly its own operations`, async () => {
      const got: string[] = [];
      const want: string[] = [];
      // Denied callers first, so that the responder's actions find the incident open.
      for (const route of ROUTES) {
        if (caller === 'responder' && route.method === 'POST' && route.url.startsWith('/v1/incidents')) continue;
        const res = await call(route, caller);
        got.push(`${route.method} ${route.route} → ${res.status}`);
        want.push(`${route.method} ${route.route} → ${expected(route, caller)}`);
        if (res.status === 401) expect(res.challenge).toMatch(/^Bearer realm="wearshift"/);
        if (res.status === 403) expect(JSON.parse(res.body).message).toMatch(/needs the role/);
      }
      expect(got).toEqual(want);
    });
  }

  it('the responder acts on the incident: acknowledge, shelve, unshelve, note, resolve', async () => {
    const actions = ROUTES.filter((r) => r.method === 'POST' && r.url.startsWith('/v1/incidents'));
    const got = [];
    for (const route of actions) got.push(`${route.route} → ${(await call(route, 'responder')).status}`);
    expect(got).toEqual(actions.map((r) => `${r.route} → ${r.ok}`));
  });

  it('acknowledgement links: the signed link is the credential, bearer tokens neither open nor replace it', async () => {
    const link = signAckLink({ incidentId: ID, recipient: 'oncall@plant.example', expiresAt: new Date(Date.now() + 3_600_000) }, ACK_SECRET);
    const forged = signAckLink({ incidentId: ID, recipient: 'oncall@plant.example', expiresAt: new Date(Date.now() + 3_600_000) }, 'some-other-secret-0123456789abcdef');
    for (const caller of CALLERS) {
      const page = await call({ method: 'GET', route: '/ack/*', url: `/ack/${link}`, allowed: 'public', ok: 200 }, caller);
      expect(page.status, `GET with a valid link as ${caller}`).toBe(200);
      const refused = await call({ method: 'GET', route: '/ack/*', url: `/ack/${forged}`, allowed: 'public', ok: 403 }, caller);
      expect(refused.status, `GET with a link signed by another key as ${caller}`).toBe(403);
    }
  });

  it('acknowledgement links: forged, expired or for no known incident, they acknowledge nothing in the store', async () => {
    const expiresAt = new Date(Date.now() + 3_600_000);
    const good = signAckLink({ incidentId: OTHER_ID, recipient: 'oncall@plant.example', expiresAt }, ACK_SECRET);
    const forged = `${good.slice(0, 12)}${good[12] === 'A' ? 'B' : 'A'}${good.slice(13)}`;
    const expired = signAckLink({ incidentId: OTHER_ID, recipient: 'oncall@plant.example', expiresAt: new Date(Date.now() - 1000) }, ACK_SECRET);
    const unknown = signAckLink({ incidentId: 'PS9-P9/gearbox@LAB-9999', recipient: 'oncall@plant.example', expiresAt }, ACK_SECRET);
    const wrongKey = signAckLink({ incidentId: OTHER_ID, recipient: 'oncall@plant.example', expiresAt }, 'some-other-secret-0123456789abcdef');
    const form = new URLSearchParams({ name: 'R. Okafor' }).toString();
    const postAck = (token: string) => fetch(`${base}/ack/${token}`, { method: 'POST', headers: { 'content-type': 'application/x-www-form-urlencoded' }, body: form });
    expect((await postAck(forged)).status).toBe(403);
    expect((await postAck(expired)).status).toBe(410);
    expect((await postAck(wrongKey)).status).toBe(403);
    expect((await postAck(unknown)).status).toBe(404);
    expect((await store.get(OTHER_ID))!.acknowledged).toBeNull();
    // The genuine link does acknowledge, by the name typed in the form.
    expect((await postAck(good)).status).toBe(200);
    expect((await store.get(OTHER_ID))!.acknowledged).toMatchObject({ by: 'R. Okafor' });
  });
});
