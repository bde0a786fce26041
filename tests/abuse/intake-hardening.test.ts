/**
 * Careless and hostile content that used to pass: a correction sent with the same sampleId and revision (accepted,
 * then silently discarded), names that read like another unit ("PS1 " with a trailing space, "ＰＳ1" full-width,
 * "РS1" with a Cyrillic Р), and control characters (ESC, CR, C1) in notes and names that a terminal would act on
 * when `wearshift incidents show`, `import --dry-run`, `replay` or `failed list` prints them. Real API, queue
 * workers and CLI over a private redis-server. The confusable letters are from Unicode Technical Standard #39 (confusables), from memory.
 */
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import type { Queue } from 'bullmq';
import type { Redis } from 'ioredis';
import { afterAll, beforeAll, describe, expect, it, vi } from 'vitest';
import type { Step } from '../../src/analysis/model.ts';
import { main } from '../../src/cli/main.ts';
import { ConfigSchema } from '../../src/domain/config.ts';
import { parseConfig } from '../../src/domain/configFile.ts';
import { formatReading } from '../../src/domain/reading.ts';
import { buildServer, type WearshiftServer } from '../../src/http/server.ts';
import { incidentRules } from '../../src/incidents/policy.ts';
import { createResultProducer, type ResultProducer } from '../../src/queue/producer.ts';
import { openQueue, QUEUE_NAMES, resolveQueueSettings } from '../../src/queue/queues.ts';
import { startWorkers, type RunningWorkers } from '../../src/queue/workers.ts';
import { RedisIncidents } from '../../src/redis/redisIncidents.ts';
import { RedisStore } from '../../src/redis/redisStore.ts';
import { silentLogger } from '../../src/telemetry/logger.ts';
import { createMetrics } from '../../src/telemetry/metrics.ts';
import { drained } from '../helpers/queueDrain.ts';
import { startRedisServer, type RedisServer } from '../helpers/redisServer.ts';
import { accessTokensFromEnv } from '../../src/runtime/accessTokensFromEnv.ts';

const prefix = '{hardening}';
const INGEST = 'ingest-hardening-71c0e2';
const RESPONDER = 'responder-hardening-3a9d44';
const ESC = '\u001b';

let redis: RedisServer;
let client: Redis;
let app: WearshiftServer;
let producer: ResultProducer;
let workers: RunningWorkers;
let queues: Queue[];
let storage: RedisStore;
let incidents: RedisIncidents;
let dir: string;
let configFile: string;
const saved = { ...process.env };

beforeAll(async () => {
  redis = await startRedisServer();
  client = redis.client();
  Object.assign(process.env, { WEARSHIFT_TOKEN_INGEST: INGEST, WEARSHIFT_TOKEN_RESPONDER: RESPONDER, REDIS_URL: redis.url });
  const config = parseConfig(`redis: { prefix: "${prefix}" }`);
  producer = createResultProducer({ connection: client, prefix });
  storage = new RedisStore(client, { prefix });
  incidents = new RedisIncidents(client, { rules: incidentRules(ConfigSchema.parse({})), prefix });
  workers = startWorkers({ connection: client, config, logger: silentLogger() }, { prefix });
  const settings = resolveQueueSettings({ prefix });
  queues = [openQueue(QUEUE_NAMES.results, client, settings), openQueue(QUEUE_NAMES.evaluate, client, settings)];
  app = await buildServer({ tokens: accessTokensFromEnv(process.env), logger: silentLogger(), metrics: createMetrics({ defaultMetrics: false }), ping: () => client.ping(), producer, incidents });
  await app.ready();
  dir = mkdtempSync(join(tmpdir(), 'wearshift-hardening-'));
  configFile = join(dir, 'site.yaml');
  writeFileSync(configFile, `redis:\n  prefix: '${prefix}'\n`);
}, 60_000);

afterAll(async () => {
  process.env = saved;
  await app?.close();
  await workers?.close();
  await producer?.close();
  await Promise.all((queues ?? []).map((q) => q.close()));
  await redis?.dispose();
  if (dir) rmSync(dir, { recursive: true, force: true });
});

const post = (payload: unknown) =>
  app.inject({ method: 'POST', url: '/v1/results', headers: { authorization: `Bearer ${INGEST}`, 'content-type': 'application/json' }, payload: JSON.stringify(payload) });

const result = (overrides: Record<string, unknown> = {}) => ({ sampleId: 'LAB-9001', unit: 'PS1', component: 'gearbox', sampledAt: '2026-03-01T08:00:00Z', oilHours: 250, readings: { Fe: 12 }, ...overrides });

async function cli(...argv: string[]): Promise<{ code: number; out: string; err: string }> {
  let out = '';
  let err = '';
  const o = vi.spyOn(process.stdout, 'write').mockImplementation((s) => ((out += String(s)), true));
  const e = vi.spyOn(process.stderr, 'write').mockImplementation((s) => ((err += String(s)), true));
  try {
    return { code: await main(argv), out, err };
  } finally {
    o.mockRestore();
    e.mockRestore();
    process.exitCode = undefined;
  }
}

describe('a correction with the same sampleId and revision', () => {
  it('is refused with 409 and the reason, not accepted and discarded; the same content again stays harmless', async () => {
    expect((await post(result())).statusCode).toBe(202);
    await drained(queues);
    const again = await post(result());
    expect(again.statusCode).toBe(202);

    const changed = await post(result({ readings: { Fe: 99 } }));
    expect(changed.statusCode).toBe(409);
    const [outcome] = changed.json() as { status: string; conflict?: boolean; errors: { path: string; reason: string }[] }[];
    expect(outcome).toMatchObject({ status: 'rejected', conflict: true, errors: [{ path: 'revision' }] });
    expect(outcome!.errors[0]!.reason).toContain('sample LAB-9001 revision 0 is already stored with different content; a correction needs a higher revision (e.g. 1)');

    // Two versions of one identity in one request: the second is the conflict, the first is taken.
    const both = await post([result({ sampleId: 'LAB-9002', readings: { Fe: 5 } }), result({ sampleId: 'LAB-9002', readings: { Fe: 6 } })]);
    expect(both.statusCode).toBe(202);
    expect((both.json() as { status: string }[]).map((o) => o.status)).toEqual(['accepted', 'rejected']);

    // With a higher revision the correction is taken and wins.
    expect((await post(result({ revision: 1, readings: { Fe: 99 } }))).statusCode).toBe(202);
    await drained(queues);
    const stored = (await storage.revisions({ unit: 'PS1', component: 'gearbox' })).filter((s) => s.sample.sampleId === 'LAB-9001');
    expect(stored.map((s) => [s.sample.revision, formatReading(s.sample.readings.Fe!)])).toEqual(expect.arrayContaining([[0, '12'], [1, '99']]));
  }, 120_000);

  it('that slips past the intake (sent straight to the queue) fails its job with the reason instead of succeeding', async () => {
    const [results] = queues;
    const job = await results!.add('result', result({ sampleId: 'LAB-9001', readings: { Fe: 55 } }));
    const deadline = Date.now() + 60_000;
    let state = await job.getState();
    while (state !== 'failed' && state !== 'completed' && Date.now() < deadline) {
      await new Promise((r) => setTimeout(r, 100));
      state = await job.getState();
    }
    expect(state).toBe('failed');
    const failed = await results!.getJob(job.id!);
    expect(failed?.failedReason).toContain('a correction needs a higher revision');
  }, 120_000);
});

describe('names that read like another unit', () => {
  it('are trimmed and NFKC-normalised, and a confusable one is accepted with a warning naming the field', async () => {
    const res = await post([
      result({ sampleId: 'LAB-9101', unit: 'PS1 ', sampledAt: '2026-03-10T08:00:00Z' }),
      result({ sampleId: 'LAB-9102', unit: '\uff30\uff33\uff11', sampledAt: '2026-03-11T08:00:00Z' }),
      result({ sampleId: 'LAB-9103', unit: '\u0420S1', sampledAt: '2026-03-12T08:00:00Z' }),
    ]);
    expect(res.statusCode).toBe(202);
    const outcomes = res.json() as { status: string; warnings?: { path: string; reason: string }[] }[];
    expect(outcomes.map((o) => o.status)).toEqual(['accepted', 'accepted', 'accepted']);
    expect(outcomes[0]!.warnings).toBeUndefined();
    expect(outcomes[1]!.warnings).toBeUndefined();
    expect(outcomes[2]!.warnings).toEqual([{ path: 'unit', reason: expect.stringContaining('mixes Latin and Cyrillic letters (Р U+0420 looks Latin)') }]);
    await drained(queues);
    const units = (await storage.components()).map((c) => c.unit);
    // "PS1 " and the full-width form are the unit PS1; the Cyrillic one stays apart, as sent.
    expect(units.filter((u) => u.trim().normalize('NFKC') === 'PS1')).toEqual(['PS1']);
    expect(units).toContain('\u0420S1');
  }, 120_000);
});

describe('control characters', () => {
  it('are refused in notes and names over the API, naming the field', async () => {
    const step: Step = {
      sampleId: 'LAB-9201',
      sampledAt: '2026-03-20T08:00:00Z',
      findings: [{ unit: 'PS3', component: 'gearbox', group: 'gearboxes', measurand: 'Fe', rule: 'limit', disposition: 'incident', severity: 'alarm', value: 90, threshold: 60, basis: 'reading', sampleId: 'LAB-9201', sampledAt: '2026-03-20T08:00:00Z', explanation: 'Fe above the alarm level' }],
    };
    await incidents.applySteps({ unit: 'PS3', component: 'gearbox' }, [step], { group: 'gearboxes', now: new Date('2026-03-21T00:00:00Z'), quietBefore: new Date(0) });
    const url = `/v1/incidents/${encodeURIComponent('PS3/gearbox@LAB-9201')}/note`;
    const headers = { authorization: `Bearer ${RESPONDER}`, 'content-type': 'application/json' };
    const esc = await app.inject({ method: 'POST', url, headers, payload: JSON.stringify({ by: 'R. Tanaka', note: `ok${ESC}[2J${ESC}]0;owned\u0007` }) });
    expect(esc.statusCode).toBe(400);
    expect(esc.json().message).toContain('body.note: must not hold control characters');
    const c1 = await app.inject({ method: 'POST', url, headers, payload: JSON.stringify({ by: 'R.\u009bTanaka', note: 'checked' }) });
    expect(c1.statusCode).toBe(400);
    expect(c1.json().message).toContain('body.by');
    const fine = await app.inject({ method: 'POST', url, headers, payload: JSON.stringify({ by: 'R. Tanaka', note: 'line one\nline two' }) });
    expect(fine.statusCode).toBe(200);
  });

  it('already stored are shown escaped by `incidents show`, never sent raw to the terminal', async () => {
    // Stored through the store directly, as an older version or another tool could have.
    await incidents.applyAction({ kind: 'note', incidentId: 'PS3/gearbox@LAB-9201', by: 'old tool', note: `clear${ESC}[2J title${ESC}]0;x\u0007 back\roverwrite \u009b31m`, now: new Date('2026-03-22T00:00:00Z') });
    const shown = await cli('incidents', 'show', 'PS3/gearbox@LAB-9201', '--config', configFile);
    expect(shown.code).toBe(0);
    // eslint-disable-next-line no-control-regex
    expect(shown.out).not.toMatch(/[\u001b\u0007\r\u009b]/);
    expect(shown.out).toContain('clear\\x1B[2J title\\x1B]0;x\\x07 back\\x0Doverwrite \\x9B31m');
  });

  it('in a file are shown escaped by `import --dry-run`', async () => {
    const file = join(dir, 'hostile.ndjson');
    writeFileSync(file, `${JSON.stringify(result({ sampleId: 'LAB-9301', readings: { [`Fe${ESC}[2J`]: 1 } }))}\n${JSON.stringify(result({ sampleId: 'LAB-9302', unit: '\u0420S1' }))}\n`);
    const run = await cli('import', file, '--dry-run', '--config', configFile);
    // eslint-disable-next-line no-control-regex
    expect(`${run.out}${run.err}`).not.toMatch(/[\u001b]/);
    expect(run.err).toContain('\\x1B[2J');
    expect(run.err).toContain('line 2 (sampleId LAB-9302): warning: unit:');
  });

  it('in a file are shown escaped by `replay`', async () => {
    const file = join(dir, 'hostile-replay.ndjson');
    writeFileSync(file, `${JSON.stringify(result({ sampleId: 'LAB-9401', readings: { [`Fe${ESC}[2J`]: 1, [`Cu\u009b31m`]: 2 } }))}\n${JSON.stringify(result({ sampleId: 'LAB-9402', sampledAt: '2026-03-02T08:00:00Z' }))}\n`);
    const run = await cli('replay', file, '--config', configFile, '--now', '2026-04-01T00:00:00Z');
    // eslint-disable-next-line no-control-regex
    expect(`${run.out}${run.err}`).not.toMatch(/[\u001b\u009b]/);
    expect(run.err).toContain('\\x1B[2J');
    expect(run.err).toContain('\\x9B31m');
  });

  it('in a job that failed are shown escaped by `failed list`', async () => {
    const [results] = queues;
    const job = await results!.add('result', result({ sampleId: `LAB-9501${ESC}]0;owned\u0007`, unit: `PS9${ESC}[2J` }));
    const deadline = Date.now() + 60_000;
    while ((await job.getState()) !== 'failed' && Date.now() < deadline) await new Promise((r) => setTimeout(r, 100));
    expect(await job.getState()).toBe('failed');
    const listed = await cli('failed', 'list', '--queue', 'results', '--config', configFile);
    expect(listed.code).toBe(0);
    // eslint-disable-next-line no-control-regex
    expect(listed.out).not.toMatch(/[\u0007\u001b]/);
    expect(listed.out).toContain('LAB-9501\\x1B]0;owned\\x07');
  });
});
