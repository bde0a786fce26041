/**
 * Paging the incident list over a private redis-server: the whole API over a real port gives 7 incidents 3 at a time,
 * each once and in the list's order, continues after the previous page when incidents are opened between pages,
 * and refuses a malformed, altered or foreign cursor (400 in the documented Error shape, naming query.cursor); every
 * answer is validated against the OpenAPI document. The store pages the same way across partitions, through ties of
 * the sort key, from a cursor whose incident closed meanwhile, and from the open incidents into the closed ones.
 */
import type { Queue } from 'bullmq';
import { Ajv2020 } from 'ajv/dist/2020.js';
import formats from 'ajv-formats';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { ConfigSchema } from '../../src/domain/config.ts';
import { severityRank, type Severity } from '../../src/domain/finding.ts';
import { openApiDocument } from '../../src/contracts/openapi.ts';
import { buildServer, type WearshiftServer } from '../../src/http/server.ts';
import { IncidentFilterSchema } from '../../src/incidents/listFilter.ts';
import type { ListPosition } from '../../src/incidents/listPage.ts';
import type { IncidentSummary } from '../../src/incidents/model.ts';
import { incidentRules } from '../../src/incidents/policy.ts';
import { createResultProducer, type ResultProducer } from '../../src/queue/producer.ts';
import type { RedisConnection } from '../../src/redis/connection.ts';
import { RedisIncidents } from '../../src/redis/redisIncidents.ts';
import { alarmStep, requestWithIncidents, serverOptions } from '../helpers/apiParts.ts';
import { startRedisServer, type RedisServer } from '../helpers/redisServer.ts';

const prefix = '{paging}';
const TOKENS = { ingest: 'ingest-paging-3f1a', responder: 'resp-paging-9c2e', viewer: 'view-paging-47d0' };
const HOUR = 3_600_000;
/** Sampling times are spread around this instant; `now` of each opening is a day after its sample. */
const T0 = Date.parse('2026-03-02T06:00:00Z');

type Json = Record<string, any>; // eslint-disable-line @typescript-eslint/no-explicit-any
const openapi = openApiDocument() as Json;
// ajv-formats is CommonJS: its plugin is the default export's default.
const addFormats = formats as unknown as typeof formats.default;
const ajv = new Ajv2020({ strict: false, allErrors: true });
addFormats(ajv);
const listSchema = ajv.compile(openapi.components.schemas.IncidentList);
const errorSchema = ajv.compile(openapi.components.schemas.Error);

let redis: RedisServer;
let request: RedisConnection;
let producer: ResultProducer;
let incidents: RedisIncidents;
let evaluateQueues: Queue[] = [];
let app: WearshiftServer;
let base: string;

/** Opens an incident of `severity` on `unit`/gearbox, sampled at `sampledAt` (ms): its place in the open list. */
async function open(store: RedisIncidents, unit: string, severity: Severity, sampledAt: number): Promise<string> {
  const sampleId = `LAB-${unit}`;
  const now = new Date(sampledAt + 86_400_000);
  const step = alarmStep(unit, 'gearbox', sampleId, now);
  await store.applySteps({ unit, component: 'gearbox' }, [{ ...step, findings: step.findings.map((f) => ({ ...f, severity })) }], { group: 'gearboxes', now, quietBefore: new Date(0) });
  return `${unit}/gearbox@${sampleId}`;
}

/** Ties by the ids' UTF-8 bytes, as a sorted set orders its members. */
const byBytes = (a: string, b: string) => Buffer.compare(Buffer.from(a, 'utf8'), Buffer.from(b, 'utf8'));

/** The documented order, worked out from the incidents themselves: open ones most severe, then newest opened first; closed ones newest closing first. */
function documentedOrder(list: IncidentSummary[]): string[] {
  const open = list.filter((i) => i.closed === null);
  const closed = list.filter((i) => i.closed !== null);
  open.sort((a, b) => severityRank(b.severity) - severityRank(a.severity) || Date.parse(b.openedAt) - Date.parse(a.openedAt) || byBytes(a.id, b.id));
  closed.sort((a, b) => Date.parse(b.closed!.at) - Date.parse(a.closed!.at) || byBytes(b.id, a.id));
  return [...open, ...closed].map((i) => i.id);
}

interface ListAnswer {
  incidents: { id: string }[];
  next: string | null;
  total: number | null;
  advisory: string;
}

async function get(query: string): Promise<{ status: number; body: Json }> {
  const r = await fetch(`${base}/v1/incidents?${query}`, { headers: { authorization: `Bearer ${TOKENS.viewer}` } });
  return { status: r.status, body: (await r.json()) as Json };
}

/** One page over HTTP: 200 and the documented answer. */
async function page(query: string): Promise<ListAnswer> {
  const { status, body } = await get(query);
  expect(status, `${query}: ${JSON.stringify(body)}`).toBe(200);
  expect(listSchema(body), `${query}: ${ajv.errorsText(listSchema.errors)}`).toBe(true);
  return body as ListAnswer;
}

/** A refusal of the cursor: 400 in the documented Error shape, naming query.cursor. */
async function refusedCursor(query: string): Promise<string> {
  const { status, body } = await get(query);
  expect(status, query).toBe(400);
  expect(errorSchema(body), `${query}: ${ajv.errorsText(errorSchema.errors)}`).toBe(true);
  expect(body).toMatchObject({ error: 'invalid-request', issues: [{ field: 'query.cursor', message: expect.any(String) }] });
  expect(body.message).toBe(`query.cursor: ${body.issues[0].message}`);
  return body.issues[0].message as string;
}

beforeAll(async () => {
  redis = await startRedisServer();
  const opened = await requestWithIncidents(redis.url, prefix);
  request = opened.request;
  incidents = opened.incidents;
  producer = createResultProducer({ connection: request, prefix });
  const parts = serverOptions({ request, prefix, tokens: TOKENS, producer, incidents });
  evaluateQueues = parts.evaluateQueues;
  app = await buildServer({ ...parts.options, openApi: openapi });
  base = await app.listen({ host: '127.0.0.1', port: 0 });
}, 60_000);

afterAll(async () => {
  await app?.close();
  await producer?.close();
  await Promise.all(evaluateQueues.map((q) => q.close()));
  request?.disconnect();
  await redis?.dispose();
});

describe('GET /v1/incidents a page at a time', () => {
  it('gives 7 incidents 3 at a time, each once and in order, and continues after the page when incidents open meanwhile', async () => {
    // Two alarms, three cautions (two of them sampled at the same instant: a tie broken by id), two watches.
    const plan: [string, Severity, number][] = [
      ['PG-1', 'caution', T0 - 5 * HOUR],
      ['PG-2', 'alarm', T0 - 2 * HOUR],
      ['PG-3', 'watch', T0 - 1 * HOUR],
      ['PG-4', 'caution', T0 - 3 * HOUR],
      ['PG-5', 'alarm', T0 - 4 * HOUR],
      ['PG-6', 'caution', T0 - 3 * HOUR],
      ['PG-7', 'watch', T0 - 6 * HOUR],
    ];
    for (const [unit, severity, at] of plan) await open(incidents, unit, severity, at);
    const expected = ['PG-2', 'PG-5', 'PG-4', 'PG-6', 'PG-1', 'PG-3', 'PG-7'].map((u) => `${u}/gearbox@LAB-${u}`);
    expect(documentedOrder(await incidents.list(IncidentFilterSchema.parse({ limit: '1000' })))).toEqual(expected);

    // Uninterrupted: 3 + 3 + 1, the last page says it is the last.
    const seen: string[] = [];
    const first = await page('limit=3');
    expect(first.total).toBe(7);
    seen.push(...first.incidents.map((i) => i.id));
    let next = first.next;
    let pages = 1;
    while (next !== null) {
      expect(pages).toBeLessThan(3);
      const p = await page(`limit=3&cursor=${next}`);
      expect(p.incidents.length, 'a page that says more follow is full').toBe(p.next === null ? 1 : 3);
      seen.push(...p.incidents.map((i) => i.id));
      next = p.next;
      pages += 1;
    }
    expect(pages).toBe(3);
    expect(seen).toEqual(expected);

    // The whole list in one page: no cursor, every match counted.
    expect(await page('limit=7')).toMatchObject({ next: null, total: 7 });
    // A narrower filter is not counted page by page, except when its first page holds every match.
    expect(await page('severity=caution&limit=2')).toMatchObject({ total: null, incidents: [{ id: expected[2] }, { id: expected[3] }] });
    expect(await page('severity=caution&limit=3')).toMatchObject({ total: 3, next: null });

    // Interrupted: after the first page an alarm opens (newest: first in the order, before the cursor) and a watch
    // sampled earlier than any other (last in the order, after the cursor).
    const before = await page('limit=3');
    expect(before.incidents.map((i) => i.id)).toEqual(expected.slice(0, 3));
    const earlier = await open(incidents, 'PG-8', 'alarm', T0);
    const later = await open(incidents, 'PG-9', 'watch', T0 - 9 * HOUR);
    const rest: string[] = [];
    next = before.next;
    while (next !== null) {
      expect(rest.length).toBeLessThan(9);
      const p = await page(`limit=3&cursor=${next}`);
      expect(p.total).toBe(9);
      rest.push(...p.incidents.map((i) => i.id));
      next = p.next;
    }
    expect(rest).toEqual([...expected.slice(3), later]);
    expect(rest).not.toContain(earlier);
    // From the start, the new alarm leads.
    expect((await page('limit=3')).incidents[0]!.id).toBe(earlier);

    // The limit may change from page to page; it stays bounded.
    const now = documentedOrder(await incidents.list(IncidentFilterSchema.parse({ limit: '1000' })));
    const two = await page('limit=2');
    expect(two.incidents.map((i) => i.id)).toEqual(now.slice(0, 2));
    expect((await page(`limit=5&cursor=${two.next}`)).incidents.map((i) => i.id)).toEqual(now.slice(2, 7));
    expect((await get('limit=1001')).status).toBe(400);
    expect((await get('limit=0')).status).toBe(400);
  });

  it('refuses a malformed, altered, empty, repeated or foreign cursor with 400 naming query.cursor', async () => {
    const cursor = (await page('limit=1')).next!;
    expect(cursor).toMatch(/^[A-Za-z0-9_-]+$/);
    expect(await refusedCursor('cursor=not-a-cursor')).toMatch(/^not a cursor this list gave/);
    expect(await refusedCursor('cursor=%E2%9C%93')).toMatch(/^not a cursor this list gave/);
    expect(await refusedCursor(`cursor=${cursor.slice(0, -3)}`)).toMatch(/^not a cursor this list gave/);
    expect(await refusedCursor(`cursor=${Buffer.from('[1,"x","o","NaN","a"]').toString('base64url')}`)).toMatch(/^not a cursor this list gave/);
    expect(await refusedCursor('cursor=')).toMatch(/^empty/);
    expect(await refusedCursor(`cursor=${'A'.repeat(5000)}`)).toMatch(/longer than 4096 characters/);
    // Given for the open incidents: refused for another state, severity, unit or group.
    for (const other of ['state=all', 'state=closed', 'severity=alarm', 'unit=PG-1', 'group=gearboxes']) {
      expect(await refusedCursor(`${other}&cursor=${cursor}`), other).toMatch(/^was given for another list/);
    }
    // The same filter written otherwise is the same list.
    expect((await get(`state=open&limit=4&cursor=${cursor}`)).status).toBe(200);
    const severities = (await page('severity=watch,alarm&limit=1')).next!;
    expect((await get(`severity=alarm&severity=watch&limit=1&cursor=${severities}`)).status).toBe(200);
    const twice = await get(`cursor=${cursor}&cursor=${cursor}`);
    expect(twice.status).toBe(400);
    expect(twice.body.issues).toEqual([{ field: 'query.cursor', message: 'given 2 times; it takes one value' }]);
  });
});

describe('the store a page at a time', () => {
  it('pages across partitions and through ties, from a cursor whose incident closed meanwhile, into the closed incidents', async () => {
    const store = new RedisIncidents(redis.client(), { rules: incidentRules(ConfigSchema.parse({})), prefix: '{paging-store}', partitions: 3 });
    // Ties of the sort key in every partition: the same severity sampled at the same instant; ids whose UTF-8 byte
    // order differs from their UTF-16 order among them.
    const units = ['ST-a', 'ST-b', 'ST-c', 'ST-d', 'ST-e', 'ST-\uff5a', 'ST-\u{1f600}', 'ST-f', 'ST-g', 'ST-h', 'ST-i', 'ST-j'];
    for (const [i, unit] of units.entries()) await open(store, unit, i % 3 === 0 ? 'alarm' : 'caution', T0 - (i % 2) * HOUR);
    const closeAt = new Date(T0 + 10 * 86_400_000);
    for (const unit of ['ST-b', 'ST-e', 'ST-h', 'ST-j']) await store.applyAction({ kind: 'resolve', incidentId: `${unit}/gearbox@LAB-${unit}`, by: 'R. Tanaka', note: 'oil changed', now: closeAt });
    const all = IncidentFilterSchema.parse({ state: 'all', limit: '1000' });
    const whole = await store.list(all);
    const expected = documentedOrder(whole);
    expect(whole.map((i) => i.id)).toEqual(expected);
    expect(new Set(expected).size).toBe(units.length);

    for (const limit of [1, 2, 5]) {
      const filter = IncidentFilterSchema.parse({ state: 'all', limit: String(limit) });
      const seen: string[] = [];
      let after: ListPosition | undefined;
      for (let pages = 1; ; pages++) {
        // A cursor that does not move on would page for ever: at most one page per incident.
        expect(pages, `limit ${limit}`).toBeLessThanOrEqual(units.length);
        const p = await store.page(filter, after);
        expect(p.total).toBe(units.length);
        seen.push(...p.incidents.map((i) => i.id));
        if (p.next === null) break;
        after = p.next;
      }
      expect(seen, `limit ${limit}`).toEqual(expected);
    }

    // The incident a cursor points at closes before the next page: the open ones after it still come, each once.
    const open3 = IncidentFilterSchema.parse({ limit: '3' });
    const first = await store.page(open3);
    const openOrder = expected.slice(0, units.length - 4);
    expect(first.incidents.map((i) => i.id)).toEqual(openOrder.slice(0, 3));
    await store.applyAction({ kind: 'resolve', incidentId: first.next!.id, by: 'R. Tanaka', note: 'oil changed', now: closeAt });
    const rest: string[] = [];
    for (let after = first.next; after !== null; ) {
      expect(rest.length).toBeLessThan(units.length);
      const p = await store.page(open3, after);
      rest.push(...p.incidents.map((i) => i.id));
      after = p.next;
    }
    expect(rest).toEqual(openOrder.slice(3));
  });
});
