/**
 * A filtered incident list is bounded: one GET /v1/incidents reads at most `incidentScanRecords` incident records
 * looking for its matches, then ends its page early with a `next` cursor that continues after the last record read
 * (so a filter that matches nothing costs many short requests, not one long one), and at most `incidentScanConcurrency`
 * such lists are read at once per process (a further one gets 503 with Retry-After). Paging through the bounded pages
 * gives every match once and in order, over one partition through the API and over several partitions in the store.
 * A real server over a private redis-server; small limits instead of the defaults.
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { ConfigSchema } from '../../src/domain/config.ts';
import { buildServer, type WearshiftServer } from '../../src/http/server.ts';
import type { IncidentRoutesStore } from '../../src/http/incidentRoutes.ts';
import { IncidentFilterSchema, type IncidentFilter } from '../../src/incidents/listFilter.ts';
import type { ListPosition } from '../../src/incidents/listPage.ts';
import { incidentRules } from '../../src/incidents/policy.ts';
import { createResultProducer, type ResultProducer } from '../../src/queue/producer.ts';
import type { RedisConnection } from '../../src/redis/connection.ts';
import { RedisIncidents } from '../../src/redis/redisIncidents.ts';
import { openAlarmIncident, requestWithIncidents, serverOptions } from '../helpers/apiParts.ts';
import { startRedisServer, type RedisServer } from '../helpers/redisServer.ts';
import type { Queue } from 'bullmq';

const prefix = '{scan}';
const TOKENS = { ingest: 'ingest-scan-token-3f1a', responder: 'responder-scan-token-9c2e', viewer: 'viewer-scan-token-47d0' };
const INCIDENTS = 60;
const SCAN_RECORDS = 10;
/** Generous bounds for a busy shared machine: they end a wait only when something is broken. */
const WAIT_MS = 120_000;

let redis: RedisServer;
let request: RedisConnection;
let producer: ResultProducer;
let incidents: RedisIncidents;
let evaluateQueues: Queue[] = [];
let app: WearshiftServer;
let base: string;
/** While set, every page read waits for it: a list held in flight for as long as the test needs. */
let gate: { entered: () => void; released: Promise<void> } | undefined;

type Json = Record<string, any>; // eslint-disable-line @typescript-eslint/no-explicit-any

async function get(query: string): Promise<{ status: number; retryAfter: string | null; body: Json }> {
  const r = await fetch(`${base}/v1/incidents?${query}`, { headers: { authorization: `Bearer ${TOKENS.viewer}` } });
  return { status: r.status, retryAfter: r.headers.get('retry-after'), body: (await r.json()) as Json };
}

/** Every page of `query` over HTTP, following `next`: the ids in order and how many pages it took. */
async function allPages(query: string): Promise<{ ids: string[]; pages: number }> {
  const ids: string[] = [];
  let pages = 0;
  let cursor: string | null | undefined;
  do {
    const { status, body } = await get(cursor === undefined ? query : `${query}&cursor=${cursor}`);
    expect(status, JSON.stringify(body)).toBe(200);
    ids.push(...(body.incidents as { id: string }[]).map((i) => i.id));
    cursor = body.next as string | null;
    pages += 1;
    expect(pages, 'the pages end').toBeLessThanOrEqual(INCIDENTS * 2);
  } while (cursor !== null);
  return { ids, pages };
}

beforeAll(async () => {
  redis = await startRedisServer();
  const opened = await requestWithIncidents(redis.url, prefix);
  request = opened.request;
  incidents = opened.incidents;
  producer = createResultProducer({ connection: request, prefix });
  const now = new Date('2026-03-02T06:00:00Z');
  for (let i = 0; i < INCIDENTS; i++) await openAlarmIncident(incidents, `SC-${String(i).padStart(2, '0')}`, 'gearbox', `LAB-${i}`, new Date(now.getTime() + i * 60_000));
  const gated: IncidentRoutesStore = {
    get: (id) => incidents.get(id),
    list: (filter) => incidents.list(filter),
    applyAction: (action) => incidents.applyAction(action),
    async page(filter, after, options) {
      const held = gate;
      if (held !== undefined) {
        held.entered();
        await held.released;
      }
      return incidents.page(filter, after, options);
    },
  };
  const parts = serverOptions({ request, prefix, tokens: TOKENS, producer, incidents });
  evaluateQueues = parts.evaluateQueues;
  app = await buildServer({ ...parts.options, incidents: gated, limits: { incidentScanRecords: SCAN_RECORDS, incidentScanConcurrency: 2 } });
  base = await app.listen({ host: '127.0.0.1', port: 0 });
}, WAIT_MS);

afterAll(async () => {
  await app?.close();
  await producer?.close();
  await Promise.all(evaluateQueues.map((q) => q.close()));
  request?.disconnect();
  await redis?.dispose();
});

describe('a filtered incident list reads a bounded number of records', () => {
  it('ends a page that found nothing after the bound, with a cursor that continues until every record was read once', { timeout: WAIT_MS }, async () => {
    const first = await get('unit=nope&state=all');
    expect(first.status).toBe(200);
    expect(first.body).toMatchObject({ incidents: [], total: null, next: expect.any(String) });
    const { ids, pages } = await allPages('unit=nope&state=all');
    expect(ids).toEqual([]);
    // Each page read at most the bound, so reading all 60 records took at least 6 pages.
    expect(pages).toBeGreaterThanOrEqual(INCIDENTS / SCAN_RECORDS);
  });

  it('gives every match once and in the list order across the shortened pages', { timeout: WAIT_MS }, async () => {
    const unbounded = (await incidents.list(IncidentFilterSchema.parse({ severity: 'alarm', limit: '1000' }))).map((i) => i.id);
    expect(unbounded).toHaveLength(INCIDENTS);
    const paged = await allPages('severity=alarm&limit=7');
    expect(paged.ids).toEqual(unbounded);
    expect((await allPages('unit=SC-37&state=all')).ids).toEqual(['SC-37/gearbox@LAB-37']);
    // A list by state alone reads only the indexes' order: one page holds them all and counts them.
    const whole = await get('state=all&limit=1000');
    expect(whole.body).toMatchObject({ total: INCIDENTS, next: null });
    expect(whole.body.incidents).toHaveLength(INCIDENTS);
  });

  it('reads at most two filtered lists at once and answers a third 503 with Retry-After', { timeout: WAIT_MS }, async () => {
    let entered = 0;
    let release!: () => void;
    let bothIn!: () => void;
    const inside = new Promise<void>((resolve) => (bothIn = resolve));
    gate = { entered: () => (++entered === 2 ? bothIn() : undefined), released: new Promise<void>((resolve) => (release = resolve)) };
    const held = [get('unit=nope&state=all'), get('severity=watch')];
    await inside;
    const refused = await get('group=nope');
    expect(refused.status).toBe(503);
    expect(refused.retryAfter).toMatch(/^\d+$/);
    expect(refused.body).toMatchObject({ error: 'unavailable', message: expect.stringContaining('filtered incident lists are being read') });
    gate = undefined;
    // A list by state alone needs no record read beyond its page: served meanwhile.
    expect((await get('state=open&limit=1')).status).toBe(200);
    release();
    expect((await Promise.all(held)).map((r) => r.status)).toEqual([200, 200]);
    // Once they are answered, the next one is read.
    expect((await get('group=nope')).status).toBe(200);
  });
});

describe('the bounded reading over several partitions', () => {
  it('pages through every match once and in order, whatever the bound', { timeout: WAIT_MS }, async () => {
    const store = new RedisIncidents(request, { rules: incidentRules(ConfigSchema.parse({})), prefix: '{scan-parts}', partitions: 3 });
    const now = new Date('2026-03-02T06:00:00Z');
    for (let i = 0; i < 40; i++) await openAlarmIncident(store, `PP-${String(i).padStart(2, '0')}`, 'gearbox', `LAB-${i}`, new Date(now.getTime() + (i % 7) * 60_000));
    // Some incidents closed, so that "all" continues from the open index into the closed one.
    const closing = (await store.list(IncidentFilterSchema.parse({ limit: '1000' }))).filter((_, i) => i % 3 === 0);
    for (const incident of closing) await store.applyAction({ kind: 'resolve', incidentId: incident.id, by: 'test', note: 'checked', now: new Date(now.getTime() + 86_400_000) });
    for (const query of [{ state: 'all', unit: 'PP-05' }, { state: 'all', severity: 'alarm' }, { state: 'active' }, { state: 'all', unit: 'nope' }]) {
      const filter: IncidentFilter = IncidentFilterSchema.parse({ ...query, limit: '4' });
      const expected = (await store.list({ ...filter, limit: 1000 })).map((i) => i.id);
      for (const examineAtMost of [1, 2, 5, 13]) {
        const ids: string[] = [];
        let after: ListPosition | undefined;
        for (let pages = 0; ; pages++) {
          expect(pages, `${JSON.stringify(query)} by ${examineAtMost}: the pages end`).toBeLessThan(200);
          const page = await store.page(filter, after, { examineAtMost });
          ids.push(...page.incidents.map((i) => i.id));
          if (page.next === null) break;
          after = page.next;
        }
        expect(ids, `${JSON.stringify(query)} by ${examineAtMost}`).toEqual(expected);
      }
    }
  });
});
