/**
 * How the whole API (buildServer over a real port, a private redis-server behind it) refuses what it cannot take:
 * a request without a usable token, or to an acknowledgement link the server did not sign, is refused before its body
 * is read, whatever the body holds; a name with control characters is refused naming the field; what the framework
 * refuses before any route (a body that is not JSON, empty or too large, a content type no route takes, an over-long
 * or badly encoded path, a path no route serves) comes in the documented Error shape, validated with Ajv against the
 * published schemas/openapi.json.
 */
import { readFileSync } from 'node:fs';
import { connect } from 'node:net';
import type { AddressInfo } from 'node:net';
import type { Queue } from 'bullmq';
import { Ajv2020 } from 'ajv/dist/2020.js';
import formats from 'ajv-formats';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { createEventHub } from '../../src/http/eventHub.ts';
import { buildServer, type WearshiftServer } from '../../src/http/server.ts';
import { openApiDocument } from '../../src/contracts/openapi.ts';
import { signAckLink } from '../../src/notify/ackLink.ts';
import { createResultProducer, type ResultProducer } from '../../src/queue/producer.ts';
import type { RedisConnection } from '../../src/redis/connection.ts';
import { openAlarmIncident, requestWithIncidents, serverOptions } from '../helpers/apiParts.ts';
import { startRedisServer, type RedisServer } from '../helpers/redisServer.ts';

const prefix = '{refusals}';
const ACK_SECRET = 'ack-secret-refusals-62f1c0a9d4';
const TOKENS = { ingest: 'ingest-refusals-0b4e', responder: 'resp-refusals-71c9', viewer: 'view-refusals-5a3d' };
const BODY_LIMIT = 64 * 1024;
const NOW = new Date();
const ID = 'PS4-P2/gearbox@LAB-4001';
const INCIDENT = `/v1/incidents/${encodeURIComponent(ID)}`;
const COMPONENT = '/v1/units/PS4-P2/components/gearbox';
/** Every POST that needs a token and takes a JSON body. */
const POSTS = [
  ...['ack', 'shelve', 'unshelve', 'resolve', 'note'].map((verb) => `${INCIDENT}/${verb}`),
  `${COMPONENT}/samples/LAB-4001/verdict`,
  '/v1/results',
];
/** A link this server signed, to the incident above. */
const ACK_LINK = signAckLink({ incidentId: ID, recipient: 'oncall@plant.example', expiresAt: new Date(NOW.getTime() + 86_400_000) }, ACK_SECRET);
/** Generous: a busy two-core machine. A refused request is answered at once, long before this. */
const ANSWER_WITHIN_MS = 30_000;

let redis: RedisServer;
let request: RedisConnection;
let producer: ResultProducer;
let evaluateQueues: Queue[] = [];
let app: WearshiftServer;
let base: string;
let port: number;

const auth = (role: keyof typeof TOKENS) => ({ authorization: `Bearer ${TOKENS[role]}` });

beforeAll(async () => {
  redis = await startRedisServer();
  const opened = await requestWithIncidents(redis.url, prefix);
  request = opened.request;
  const incidents = opened.incidents;
  await openAlarmIncident(incidents, 'PS4-P2', 'gearbox', 'LAB-4001', NOW);
  producer = createResultProducer({ connection: request, prefix });
  const parts = serverOptions({ request, prefix, tokens: TOKENS, producer, incidents });
  evaluateQueues = parts.evaluateQueues;
  app = await buildServer({
    ...parts.options,
    hub: createEventHub(),
    ackLinkSecrets: [ACK_SECRET],
    openApi: openApiDocument(),
    bodyLimitBytes: BODY_LIMIT,
    // A request whose body never comes is cut off well before the test's bound, so a late check shows as a failure.
    limits: { requestTimeoutMs: 10_000, headersTimeoutMs: 10_000, keepAliveTimeoutMs: 60_000 },
  });
  base = await app.listen({ host: '127.0.0.1', port: 0 });
  port = (app.server.address() as AddressInfo).port;
}, 60_000);

afterAll(async () => {
  await app?.close();
  await producer?.close();
  await Promise.all(evaluateQueues.map((q) => q.close()));
  request?.disconnect();
  await redis?.dispose();
});

/**
 * Sends the request head and `bodyStart` over a raw socket, never the rest of the declared body; resolves with the
 * status line of the first answer, or with what happened instead.
 */
function headOnly(path: string, headers: Record<string, string>, declaredLength: number, bodyStart: string): Promise<string> {
  return new Promise((resolve) => {
    const socket = connect({ host: '127.0.0.1', port });
    let text = '';
    const done = (what: string) => {
      clearTimeout(timer);
      socket.destroy();
      resolve(what);
    };
    const timer = setTimeout(() => done(`no answer within ${ANSWER_WITHIN_MS} ms`), ANSWER_WITHIN_MS);
    socket.on('error', (e) => done(`socket error ${e.message}`));
    socket.on('data', (d) => {
      text += d.toString('latin1');
      const line = text.indexOf('\r\n');
      if (line !== -1) done(text.slice(0, line));
    });
    socket.on('close', () => done(`closed after ${JSON.stringify(text.slice(0, 40))}`));
    const head = Object.entries({ host: '127.0.0.1', 'content-type': 'application/json', 'content-length': String(declaredLength), ...headers }).map(([k, v]) => `${k}: ${v}\r\n`);
    socket.write(`POST ${path} HTTP/1.1\r\n${head.join('')}\r\n${bodyStart}`);
  });
}

describe('a request without a usable token', () => {
  it('is refused with 401 before its body is read: invalid JSON, an empty body, a body over the limit', async () => {
    for (const path of POSTS) {
      const bad = await fetch(`${base}${path}`, { method: 'POST', headers: { 'content-type': 'application/json' }, body: '{bad' });
      expect(`${path} ${bad.status}`).toBe(`${path} 401`);
      expect(bad.headers.get('www-authenticate')).toMatch(/^Bearer/);
      expect(((await bad.json()) as { error: string }).error).toBe('unauthorized');
      const empty = await fetch(`${base}${path}`, { method: 'POST', headers: { 'content-type': 'application/json' }, body: '' });
      expect(`${path} ${empty.status}`).toBe(`${path} 401`);
      await empty.text();
      // Over the limit, sent whole (in-process, so that the close after the refusal cannot cut the upload short).
      const whole = await app.inject({ method: 'POST', url: path, headers: { 'content-type': 'application/json' }, payload: `[${'1,'.repeat(BODY_LIMIT)}1]` });
      expect(`${path} ${whole.statusCode}`).toBe(`${path} 401`);
      // Over the limit by its declared length, and the body never comes: answered at once, not after a timeout.
      expect(await headOnly(path, {}, 6_000_000, '{')).toBe('HTTP/1.1 401 Unauthorized');
      expect(await headOnly(path, { authorization: 'Bearer not-a-token' }, 6_000_000, '{')).toBe('HTTP/1.1 401 Unauthorized');
    }
  });

  it('whose role does not permit the route is refused with 403 before its body is read', async () => {
    for (const path of POSTS) {
      const role = path === '/v1/results' ? 'viewer' : 'ingest';
      const bad = await fetch(`${base}${path}`, { method: 'POST', headers: { ...auth(role), 'content-type': 'application/json' }, body: '{bad' });
      expect(`${path} ${bad.status}`).toBe(`${path} 403`);
      await bad.text();
      expect(await headOnly(path, auth(role), 6_000_000, '{')).toBe('HTTP/1.1 403 Forbidden');
    }
  });

  it('is refused on every guarded GET as well, and a good token still gets through', async () => {
    for (const path of ['/v1/incidents', INCIDENT, `${COMPONENT}/series`, `${COMPONENT}/chart.svg?measurand=Fe`, '/v1/events', '/metrics']) {
      const res = await fetch(`${base}${path}`);
      expect(`${path} ${res.status}`).toBe(`${path} 401`);
      await res.text();
    }
    const note = await fetch(`${base}${INCIDENT}/note`, { method: 'POST', headers: { ...auth('responder'), 'content-type': 'application/json' }, body: JSON.stringify({ by: 'R. Tanaka', note: 'checked the breather' }) });
    expect(note.status).toBe(200);
  });
});

/**
 * Sends a request head and `bodyStart` over a raw socket, never the rest of the declared body; resolves with all the
 * server sent once it ends the socket, or with what happened instead.
 */
function untilServerCloses(path: string, headers: Record<string, string>, declaredLength: number, bodyStart: string): Promise<string> {
  return new Promise((resolve) => {
    const socket = connect({ host: '127.0.0.1', port });
    let text = '';
    const done = (what: string) => {
      clearTimeout(timer);
      socket.destroy();
      resolve(what);
    };
    const timer = setTimeout(() => done(`not closed within ${ANSWER_WITHIN_MS} ms after ${JSON.stringify(text.slice(0, 40))}`), ANSWER_WITHIN_MS);
    socket.on('error', (e) => done(`socket error ${e.message} after ${JSON.stringify(text.slice(0, 40))}`));
    socket.on('data', (d) => (text += d.toString('latin1')));
    socket.on('end', () => done(text));
    const head = Object.entries({ host: '127.0.0.1', 'content-length': String(declaredLength), ...headers }).map(([k, v]) => `${k}: ${v}\r\n`);
    socket.write(`POST ${path} HTTP/1.1\r\n${head.join('')}\r\n${bodyStart}`);
  });
}

describe('the acknowledgement form of an e-mail link', () => {
  const form = { 'content-type': 'application/x-www-form-urlencoded' };
  const forged = signAckLink({ incidentId: ID, recipient: 'oncall@plant.example', expiresAt: new Date(NOW.getTime() + 86_400_000) }, 'not-the-servers-secret-4e1b');
  const expired = signAckLink({ incidentId: ID, recipient: 'oncall@plant.example', expiresAt: new Date(NOW.getTime() - 60_000) }, ACK_SECRET);

  it('is refused before its body is read when the link is unknown, malformed or expired: answered and closed while the body never comes', async () => {
    for (const [token, status] of [
      ['any-token', '403 Forbidden'],
      [forged, '403 Forbidden'],
      [`${ACK_LINK.slice(0, 30)}`, '403 Forbidden'],
      [expired, '410 Gone'],
    ] as const) {
      // Within the form's limit and far over it: the same refusal page, not a wait for the body (408) nor 413.
      for (const declared of [4000, 6_000_000]) {
        const what = `${token.slice(0, 12)}… declaring ${declared} bytes`;
        const answer = await untilServerCloses(`/ack/${token}`, form, declared, 'name=R.');
        expect(answer.slice(0, answer.indexOf('\r\n')), what).toBe(`HTTP/1.1 ${status}`);
        expect(answer, what).toMatch(/\r\nconnection: close\r\n/i);
        expect(answer, what).toMatch(/\r\ncontent-type: text\/html/i);
      }
    }
  });

  it('of a valid link is read: declared over the limit it gets 413, sent whole within it the page answers the form', async () => {
    // Over the limit by its declared length: refused at once (the payload-too-large case above shows the answer).
    expect(await headOnly(`/ack/${ACK_LINK}`, form, 6_000_000, 'name=')).toBe('HTTP/1.1 413 Payload Too Large');
    // Within it and sent whole: the form is read and the page answers it (no name given: asked again, nothing recorded).
    const page = await fetch(`${base}/ack/${ACK_LINK}`, { method: 'POST', headers: form, body: 'note=' });
    expect(page.status).toBe(400);
    expect(await page.text()).toContain('Please give your name');
  });
});

describe('who acts', () => {
  it('is one line without control characters on every route that records a name, the sample verdict as the incident actions', async () => {
    const hostile = 'x\u001b[2J\u202e';
    for (const [path, body] of [
      [`${COMPONENT}/samples/LAB-4001/verdict`, { verdict: 'confirmed', by: hostile }],
      [`${INCIDENT}/note`, { by: hostile, note: 'checked' }],
    ] as const) {
      const res = await fetch(`${base}${path}`, { method: 'POST', headers: { ...auth('responder'), 'content-type': 'application/json' }, body: JSON.stringify(body) });
      expect(`${path} ${res.status}`).toBe(`${path} 400`);
      const answer = (await res.json()) as { error: string; message: string; issues: { field: string; message: string }[] };
      expect(answer.error).toBe('invalid-request');
      expect(answer.issues).toEqual([{ field: 'body.by', message: 'must be one line without control characters' }]);
      expect(answer.message).toBe('body.by: must be one line without control characters');
    }
    // An over-long name is refused the same way.
    const long = await fetch(`${base}${COMPONENT}/samples/LAB-4001/verdict`, { method: 'POST', headers: { ...auth('responder'), 'content-type': 'application/json' }, body: JSON.stringify({ verdict: 'confirmed', by: 'n'.repeat(81) }) });
    expect(long.status).toBe(400);
    expect(((await long.json()) as { issues: { field: string }[] }).issues.map((i) => i.field)).toEqual(['body.by']);
  });
});

// ajv-formats is CommonJS: its plugin is the default export's default.
const addFormats = formats as unknown as typeof formats.default;
const published = JSON.parse(readFileSync(new URL('../../schemas/openapi.json', import.meta.url), 'utf8')) as { components: { schemas: Record<string, object> } };
const ajv = new Ajv2020({ strict: false, allErrors: true });
addFormats(ajv);
const validError = ajv.compile(published.components.schemas.Error!);

interface Answer {
  status: number;
  headers: Record<string, string>;
  body: string;
}

/**
 * One request over a raw socket: the head, then `body` (which may be shorter than `declaredLength`: the rest never
 * comes); resolves with the first answer, read to the end of its Content-Length.
 */
function rawRequest(method: string, path: string, headers: Record<string, string>, body = '', declaredLength = Buffer.byteLength(body)): Promise<Answer> {
  return new Promise((resolve, reject) => {
    const socket = connect({ host: '127.0.0.1', port });
    let data = Buffer.alloc(0);
    const timer = setTimeout(() => finish(new Error(`no whole answer to ${method} ${path.slice(0, 60)} within ${ANSWER_WITHIN_MS} ms`)), ANSWER_WITHIN_MS);
    const finish = (outcome: Answer | Error) => {
      clearTimeout(timer);
      socket.destroy();
      if (outcome instanceof Error) reject(outcome);
      else resolve(outcome);
    };
    const tryParse = () => {
      const end = data.indexOf('\r\n\r\n');
      if (end === -1) return;
      const [statusLine, ...lines] = data.subarray(0, end).toString('latin1').split('\r\n');
      const head = Object.fromEntries(lines.map((l) => [l.slice(0, l.indexOf(':')).toLowerCase(), l.slice(l.indexOf(':') + 1).trim()]));
      const length = Number(head['content-length'] ?? 0);
      if (data.length - end - 4 < length) return;
      finish({ status: Number(statusLine!.split(' ')[1]), headers: head, body: data.subarray(end + 4, end + 4 + length).toString('utf8') });
    };
    socket.on('error', () => tryParse());
    socket.on('data', (d: Buffer) => {
      data = Buffer.concat([data, d]);
      tryParse();
    });
    socket.on('close', () => finish(new Error(`closed before a whole answer: ${JSON.stringify(data.toString('latin1').slice(0, 80))}`)));
    const head = Object.entries({ host: '127.0.0.1', connection: 'close', ...(method === 'POST' && { 'content-length': String(declaredLength) }), ...headers }).map(([k, v]) => `${k}: ${v}\r\n`);
    socket.write(`${method} ${path} HTTP/1.1\r\n${head.join('')}\r\n${body}`);
  });
}

const paths = (openApiDocument() as { paths: Record<string, Record<string, { security?: { bearer: string[] }[]; responses: Record<string, unknown> }>> }).paths;
/** Whether the OpenAPI document lists `status` for the route `template`. */
const documented = (template: string, method: string, status: number) => paths[template]?.[method.toLowerCase()]?.responses[String(status)] !== undefined;
const INCIDENT_ROUTE = '/v1/incidents/{id}';
const VERDICT_ROUTE = '/v1/units/{unit}/components/{component}/samples/{sampleId}/verdict';

/** The answer is JSON in the documented Error shape; returns it. */
function documentedError(answer: Answer, what: string): { error: string; message: string; maxBytes?: number; accepted?: string[] } {
  expect(answer.headers['content-type'], what).toMatch(/^application\/json/);
  const body = JSON.parse(answer.body) as unknown;
  expect(validError(body), `${what}: ${ajv.errorsText(validError.errors)} in ${answer.body}`).toBe(true);
  return body as { error: string; message: string; maxBytes?: number; accepted?: string[] };
}

describe('what the framework refuses before any route', () => {
  const json = { ...auth('responder'), 'content-type': 'application/json' };

  it('a body that is not JSON, or empty: 400 bad-request', async () => {
    for (const path of [`${INCIDENT}/note`, `${COMPONENT}/samples/LAB-4001/verdict`]) {
      const bad = await rawRequest('POST', path, json, '{bad');
      expect(bad.status).toBe(400);
      expect(documentedError(bad, `${path} {bad`)).toEqual({ error: 'bad-request', message: 'the body is not valid JSON, but the content type says it is' });
      const empty = await rawRequest('POST', path, json, '');
      expect(empty.status).toBe(400);
      expect(documentedError(empty, `${path} empty`)).toMatchObject({ error: 'bad-request', message: expect.stringMatching(/empty/) });
    }
    const results = await rawRequest('POST', '/v1/results', { ...auth('ingest'), 'content-type': 'application/json' }, '{bad');
    expect(results.status).toBe(400);
    expect(documentedError(results, '/v1/results {bad').error).toBe('bad-request');
  });

  it('a body over the limit: 413 payload-too-large with the limit in maxBytes, on every route that takes one', async () => {
    for (const [path, headers, maxBytes, template] of [
      [`${INCIDENT}/ack`, json, BODY_LIMIT, `${INCIDENT_ROUTE}/ack`],
      [`${COMPONENT}/samples/LAB-4001/verdict`, json, BODY_LIMIT, VERDICT_ROUTE],
      ['/v1/results', { ...auth('ingest'), 'content-type': 'application/json' }, BODY_LIMIT, '/v1/results'],
      ['/v1/results', { ...auth('ingest'), 'content-type': 'application/x-ndjson' }, BODY_LIMIT, '/v1/results'],
      // The acknowledgement form of a valid e-mail link takes a name and a note, no more (a page, not in the API document).
      [`/ack/${ACK_LINK}`, { 'content-type': 'application/x-www-form-urlencoded' }, 8192, undefined],
    ] as const) {
      const answer = await rawRequest('POST', path, headers, '{', 6_000_000);
      expect(`${path} ${answer.status}`).toBe(`${path} 413`);
      if (template !== undefined) expect(documented(template, 'POST', 413), `413 of POST ${template} documented`).toBe(true);
      const body = documentedError(answer, `${path} 413`);
      expect(body).toMatchObject({ error: 'payload-too-large', maxBytes });
      expect(answer.headers.connection).toBe('close');
    }
  });

  it('a content type no route takes: 415 naming the types the route takes', async () => {
    const note = await rawRequest('POST', `${INCIDENT}/note`, { ...auth('responder'), 'content-type': 'application/xml' }, '<note/>');
    expect(note.status).toBe(415);
    const body = documentedError(note, 'note 415');
    expect(body).toMatchObject({ error: 'unsupported-media-type', accepted: ['application/json'] });
    expect(body.message).toContain('"application/xml"');
    expect(body.message).toContain('send application/json');
    for (const template of [...['ack', 'shelve', 'unshelve', 'resolve', 'note'].map((v) => `${INCIDENT_ROUTE}/${v}`), VERDICT_ROUTE, '/v1/results']) {
      expect(documented(template, 'POST', 415), `415 of POST ${template} documented`).toBe(true);
    }
    const results = await rawRequest('POST', '/v1/results', { ...auth('ingest'), 'content-type': 'text/csv' }, 'sampleId,Fe\nA,1\n');
    expect(results.status).toBe(415);
    expect(documentedError(results, 'results 415')).toMatchObject({ error: 'unsupported-media-type', accepted: ['application/json', 'application/x-ndjson'] });
  });

  it('an over-long path parameter: 414 uri-too-long, without echoing the path', async () => {
    const path = `/v1/incidents/${'x'.repeat(3000)}`;
    const answer = await rawRequest('GET', path, auth('viewer'));
    expect(answer.status).toBe(414);
    const body = documentedError(answer, '414');
    expect(body.error).toBe('uri-too-long');
    expect(answer.body.length).toBeLessThan(500);
    for (const [template, method] of Object.entries(paths).flatMap(([t, ops]) => (t.includes('{') ? Object.keys(ops).map((m) => [t, m] as const) : []))) {
      expect(documented(template, method, 414), `414 of ${method.toUpperCase()} ${template} documented`).toBe(true);
    }
  });

  it('a path no route serves: 404 not-found, with a hint for an incident id sent without percent-encoding', async () => {
    const unencoded = await rawRequest('GET', '/v1/incidents/PS4-P2/gearbox@LAB-4001', auth('viewer'));
    expect(unencoded.status).toBe(404);
    expect(documentedError(unencoded, 'unencoded id').message).toMatch(/^no route for GET \/v1\/incidents\/PS4-P2\/gearbox@LAB-4001; an incident id holds "\/" and must be percent-encoded/);
    const nowhere = await rawRequest('GET', `/v2/${'x'.repeat(5000)}?token=abc`, {});
    expect(nowhere.status).toBe(404);
    const body = documentedError(nowhere, 'unknown route');
    expect(body.error).toBe('not-found');
    expect(body.message.length).toBeLessThan(200);
    expect(body.message).not.toContain('token=');
    const badEncoding = await rawRequest('GET', '/v1/incidents/%E0%A4%A', auth('viewer'));
    expect(badEncoding.status).toBe(400);
    expect(documentedError(badEncoding, 'bad percent-encoding').error).toBe('bad-request');
  });
});

describe('the metrics', () => {
  it('admit a viewer or a responder token, as the OpenAPI document says', async () => {
    for (const role of ['viewer', 'responder'] as const) {
      const res = await fetch(`${base}/metrics`, { headers: auth(role) });
      expect(`${role} ${res.status}`).toBe(`${role} 200`);
      await res.text();
    }
    const ingest = await fetch(`${base}/metrics`, { headers: auth('ingest') });
    expect(ingest.status).toBe(403);
    await ingest.text();
    expect(paths['/metrics']!.get!.security).toEqual([{ bearer: ['viewer'] }, { bearer: ['responder'] }]);
  });
});
