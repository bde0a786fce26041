/** The incident HTTP API over a real Redis store: roles (RFC 6750 bearer tokens), validation, 404 and 409. */
import { createHash } from 'node:crypto';
import Fastify, { type FastifyInstance } from 'fastify';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { Step } from '../../src/analysis/model.ts';
import { ADVISORY_CAUTION } from '../../src/domain/caution.ts';
import { ConfigSchema } from '../../src/domain/config.ts';
import { incidentRoutes } from '../../src/http/incidentRoutes.ts';
import { incidentRules } from '../../src/incidents/policy.ts';
import { RedisIncidents as RedisIncidentStore } from '../../src/redis/redisIncidents.ts';
import { startRedisServer, type RedisServer } from '../helpers/redisServer.ts';
import { accessTokensFromEnv } from '../../src/runtime/accessTokensFromEnv.ts';

/** The API's tokens, handed to the routes (never written into the process environment). */
const tokenEnv: NodeJS.ProcessEnv = {};

const NOW = new Date('2026-04-02T10:00:00Z');
const ID = 'PS2-P3/gearbox@LAB-0100';
const PATH = `/v1/incidents/${encodeURIComponent(ID)}`;

let server: RedisServer;
let app: FastifyInstance;
let store: RedisIncidentStore;

const saved = { ...process.env };
const auth = (token: string) => ({ authorization: `Bearer ${token}` });

beforeAll(async () => {
  server = await startRedisServer();
  store = new RedisIncidentStore(server.client(), { rules: incidentRules(ConfigSchema.parse({})), prefix: '{routes}' });
  const step: Step = {
    sampleId: 'LAB-0100',
    sampledAt: '2026-04-01T08:00:00Z',
    findings: [
      { unit: 'PS2-P3', component: 'gearbox', group: 'gearboxes', measurand: 'Fe', rule: 'cusum', disposition: 'incident', severity: 'alarm', value: 7, threshold: 5, basis: 'cusum', direction: 'up', sampleId: 'LAB-0100', sampledAt: '2026-04-01T08:00:00Z', explanation: 'Fe wear rate shifted up' },
    ],
  };
  await store.applySteps({ unit: 'PS2-P3', component: 'gearbox' }, [step], { group: 'gearboxes', now: NOW, quietBefore: new Date(0) });
  tokenEnv.WEARSHIFT_TOKEN_VIEWER = 'view-1-token-9a4f2c, view-2-token-3e8b1d';
  tokenEnv.WEARSHIFT_TOKEN_RESPONDER = 'resp-1-token-7c2d0e';
  tokenEnv.WEARSHIFT_TOKEN_INGEST = 'ingest-1-token-5b9e4a';
  app = Fastify();
  await app.register(incidentRoutes, { tokens: accessTokensFromEnv(tokenEnv), store, now: () => NOW });
  await app.ready();
});

afterAll(async () => {
  process.env = saved;
  await app.close();
  await server.dispose();
});

describe('incident routes', () => {
  it('401 without or with an unknown token, with a Bearer challenge (RFC 6750 §3)', async () => {
    const none = await app.inject({ method: 'GET', url: '/v1/incidents' });
    expect(none.statusCode).toBe(401);
    expect(none.headers['www-authenticate']).toMatch(/^Bearer/);
    const wrong = await app.inject({ method: 'GET', url: '/v1/incidents', headers: auth('view-3') });
    expect(wrong.statusCode).toBe(401);
    expect(wrong.headers['www-authenticate']).toContain('error="invalid_token"');
    const basic = await app.inject({ method: 'GET', url: '/v1/incidents', headers: { authorization: 'Basic dmlldy0xOg==' } });
    expect(basic.statusCode).toBe(401);
  });

  it('viewers read, and only responders act', async () => {
    const list = await app.inject({ method: 'GET', url: '/v1/incidents', headers: auth('view-2-token-3e8b1d') });
    expect(list.statusCode).toBe(200);
    expect(list.json().incidents.map((i: { id: string }) => i.id)).toEqual([ID]);
    expect((await app.inject({ method: 'GET', url: '/v1/incidents', headers: auth('ingest-1-token-5b9e4a') })).statusCode).toBe(403);
    const show = await app.inject({ method: 'GET', url: PATH, headers: auth('resp-1-token-7c2d0e') });
    expect(show.statusCode).toBe(200);
    expect(show.json().incident.timeline[0]).toMatchObject({ kind: 'opened', sampleId: 'LAB-0100' });
    // The caution goes with the incidents, as in webhooks and `incidents --json`.
    expect(list.json().advisory).toBe(ADVISORY_CAUTION);
    expect(show.json().advisory).toBe(ADVISORY_CAUTION);

    const denied = await app.inject({ method: 'POST', url: `${PATH}/ack`, headers: auth('view-1-token-9a4f2c'), payload: { by: 'R. Tanaka' } });
    expect(denied.statusCode).toBe(403);
    expect(denied.json().message).toContain('responder');
  });

  it('400 names the field; 404 for an unknown incident', async () => {
    const bad = await app.inject({ method: 'POST', url: `${PATH}/shelve`, headers: auth('resp-1-token-7c2d0e'), payload: { by: 'R. Tanaka', reason: 'pump swap' } });
    expect(bad.statusCode).toBe(400);
    expect(bad.json().issues).toEqual([{ field: 'body.until', message: expect.any(String) }]);
    const extra = await app.inject({ method: 'POST', url: `${PATH}/ack`, headers: auth('resp-1-token-7c2d0e'), payload: { by: 'R. Tanaka', who: 'x' } });
    expect(extra.statusCode).toBe(400);
    expect(extra.json().message).toContain('who');
    const noBody = await app.inject({ method: 'POST', url: `${PATH}/resolve`, headers: auth('resp-1-token-7c2d0e') });
    expect(noBody.statusCode).toBe(400);
    const query = await app.inject({ method: 'GET', url: '/v1/incidents?severity=high', headers: auth('view-1-token-9a4f2c') });
    expect(query.statusCode).toBe(400);
    expect(query.json().message).toContain('query.severity');
    // The engine's own checks come back as 400 too, in the same shape, naming the body's field: shelving beyond the
    // limit (168 h by default; NOW + 1 392 h here), and until a time already past.
    const long = await app.inject({ method: 'POST', url: `${PATH}/shelve`, headers: auth('resp-1-token-7c2d0e'), payload: { by: 'R. Tanaka', reason: 'x', until: '2026-05-30T00:00:00Z' } });
    expect(long.statusCode).toBe(400);
    expect(long.json()).toEqual({
      error: 'invalid-request',
      message: expect.stringMatching(/^body\.until: shelving is limited to 168 h \(incidents\.maxShelveHours\)/),
      issues: [{ field: 'body.until', message: expect.stringMatching(/^shelving is limited to 168 h/) }],
    });
    const past = await app.inject({ method: 'POST', url: `${PATH}/shelve`, headers: auth('resp-1-token-7c2d0e'), payload: { by: 'R. Tanaka', reason: 'x', until: '2026-04-01T00:00:00Z' } });
    expect(past.statusCode).toBe(400);
    expect(past.json().issues).toEqual([{ field: 'body.until', message: '2026-04-01T00:00:00.000Z is not in the future' }]);

    const unknown = encodeURIComponent('PS2-P3/gearbox@LAB-9999');
    expect((await app.inject({ method: 'GET', url: `/v1/incidents/${unknown}`, headers: auth('view-1-token-9a4f2c') })).statusCode).toBe(404);
    expect((await app.inject({ method: 'POST', url: `/v1/incidents/${unknown}/ack`, headers: auth('resp-1-token-7c2d0e'), payload: { by: 'x' } })).statusCode).toBe(404);
  });

  it('takes a repeated severity as the list; refuses any other parameter given twice, naming it', async () => {
    const ids = async (query: string) => {
      const res = await app.inject({ method: 'GET', url: `/v1/incidents?${query}`, headers: auth('view-1-token-9a4f2c') });
      expect(res.statusCode, query).toBe(200);
      return res.json().incidents.map((i: { id: string }) => i.id);
    };
    expect(await ids('severity=alarm&severity=watch')).toEqual([ID]);
    expect(await ids('severity=watch&severity=caution')).toEqual([]);
    expect(await ids('severity=watch,alarm')).toEqual([ID]);
    const twice = await app.inject({ method: 'GET', url: '/v1/incidents?state=open&state=closed&limit=5', headers: auth('view-1-token-9a4f2c') });
    expect(twice.statusCode).toBe(400);
    expect(twice.json()).toEqual({ error: 'invalid-request', message: 'query.state: given 2 times; it takes one value', issues: [{ field: 'query.state', message: 'given 2 times; it takes one value' }] });
    const unknown = await app.inject({ method: 'GET', url: '/v1/incidents?severity=alarm&severity=high', headers: auth('view-1-token-9a4f2c') });
    expect(unknown.statusCode).toBe(400);
    expect(unknown.json().message).toMatch(/^query\.severity\.1: unknown severity "high"/);
  });

  it('acknowledges, shelves, resolves; acting on a closed incident is a 409', async () => {
    const ack = await app.inject({ method: 'POST', url: `${PATH}/ack`, headers: auth('resp-1-token-7c2d0e'), payload: { by: 'R. Tanaka', note: 'on my way' } });
    expect(ack.statusCode).toBe(200);
    expect(ack.json().advisory).toBe(ADVISORY_CAUTION);
    // The token that acted is recorded beside the typed name: its role and the first bytes of its SHA-256.
    const credential = `responder token ${createHash('sha256').update('resp-1-token-7c2d0e').digest('hex').slice(0, 8)}`;
    expect(ack.json().incident.acknowledged).toEqual({ by: 'R. Tanaka', at: NOW.toISOString(), note: 'on my way', credential, severity: 'alarm', measurands: ['Fe'] });
    const shelve = await app.inject({ method: 'POST', url: `${PATH}/shelve`, headers: auth('resp-1-token-7c2d0e'), payload: { by: 'R. Tanaka', reason: 'oil change booked', until: '2026-04-03T10:00:00Z' } });
    expect(shelve.json().incident.shelved).toMatchObject({ until: '2026-04-03T10:00:00.000Z', reason: 'oil change booked' });
    const resolve = await app.inject({ method: 'POST', url: `${PATH}/resolve`, headers: auth('resp-1-token-7c2d0e'), payload: { by: 'R. Tanaka', note: 'bearing replaced' } });
    expect(resolve.json().incident.closed).toMatchObject({ how: 'resolved', note: 'bearing replaced' });
    const again = await app.inject({ method: 'POST', url: `${PATH}/ack`, headers: auth('resp-1-token-7c2d0e'), payload: { by: 'R. Tanaka' } });
    expect(again.statusCode).toBe(409);
    const closed = await app.inject({ method: 'GET', url: '/v1/incidents?state=closed', headers: auth('view-1-token-9a4f2c') });
    expect(closed.json().incidents.map((i: { id: string }) => i.id)).toEqual([ID]);
  });

  it('serves over a real listening port', async () => {
    const live = Fastify();
    await live.register(incidentRoutes, { tokens: accessTokensFromEnv(tokenEnv), store });
    const address = await live.listen({ port: 0, host: '127.0.0.1' });
    try {
      const r = await fetch(`${address}${PATH}`, { headers: auth('view-1-token-9a4f2c') });
      expect(r.status).toBe(200);
      expect(((await r.json()) as { incident: { id: string } }).incident.id).toBe(ID);
      const post = await fetch(`${address}${PATH}/note`, { method: 'POST', headers: { ...auth('resp-1-token-7c2d0e'), 'content-type': 'application/json' }, body: JSON.stringify({ by: 'R. Tanaka', note: 'lab confirmed' }) });
      expect(post.status).toBe(200);
      const unauthorised = await fetch(`${address}/v1/incidents`);
      expect(unauthorised.status).toBe(401);
      expect(unauthorised.headers.get('www-authenticate')).toMatch(/^Bearer/);
    } finally {
      await live.close();
    }
  });
});
