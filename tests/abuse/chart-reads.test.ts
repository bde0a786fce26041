/**
 * Chart and series requests beyond what the chart pool can take are refused before their history is read: a flood of
 * requests for long histories cannot make the API read them all from Redis at once. The history reader here is held
 * until the test lets it go, so what is counted does not depend on speed. Real HTTP on 127.0.0.1.
 */
import Fastify, { type FastifyInstance } from 'fastify';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { seriesRoutes } from '../../src/http/seriesRoutes.ts';
import { ChartPool } from '../../src/render/chartPool.ts';
import { inputOf, type ComponentInput } from '../../src/render/componentInput.ts';
import { accessTokensFromEnv } from '../../src/runtime/accessTokensFromEnv.ts';
import { CONFIG } from '../unit/chart-fixtures.ts';
import { sample, settingsFrom } from '../unit/history-fixtures.ts';

const TOKEN = 'chart-reads-viewer-9c2d';
const settings = settingsFrom(CONFIG);
const samples = Array.from({ length: 40 }, (_, i) => sample(i + 1, { sampleId: `S-${i}`, readings: { Fe: 5 + (i % 7) } }));
const input: ComponentInput = inputOf({ unit: 'RD-1', component: 'gearbox', group: settings.group, samples: samples.length, lastSampledAt: samples.at(-1)!.sampledAt }, settings, samples);

let app: FastifyInstance;
let base: string;
const pool = new ChartPool({ concurrency: 1, queue: 2, timeoutMs: 10 * 60_000 });
let reading = 0;
let mostReading = 0;
let release: () => void = () => {};
const released = new Promise<void>((resolve) => (release = resolve));

beforeAll(async () => {
  app = Fastify();
  await app.register(seriesRoutes, {
    tokens: accessTokensFromEnv({ WEARSHIFT_TOKEN_VIEWER: TOKEN }),
    pool,
    loadInput: async () => {
      reading++;
      mostReading = Math.max(mostReading, reading);
      await released;
      reading--;
      return input;
    },
  });
  base = await app.listen({ host: '127.0.0.1', port: 0 });
});

afterAll(async () => {
  release();
  await app?.close();
  await pool.close();
});

describe('chart requests beyond the pool', () => {
  it('are refused with 503 before their history is read; those taken are drawn once the reads end', async () => {
    const ask = () => fetch(`${base}/v1/units/RD-1/components/gearbox/series`, { headers: { authorization: `Bearer ${TOKEN}` } }).then(async (r) => ({ status: r.status, retryAfter: r.headers.get('retry-after'), body: await r.text() }));
    const first = [ask(), ask(), ask()];
    // The three the pool can take (one thread, two waiting) are reading; wait until they are.
    const until = Date.now() + 60_000;
    while (reading < 3 && Date.now() < until) await new Promise((r) => setTimeout(r, 10));
    expect(reading).toBe(3);
    const more = await Promise.all(Array.from({ length: 7 }, ask));
    expect(more.map((a) => a.status)).toEqual(Array(7).fill(503));
    expect(more.every((a) => a.retryAfter === '2' && a.body.includes('3 are being read'))).toBe(true);
    expect(mostReading).toBe(3);
    release();
    const taken = await Promise.all(first);
    expect(taken.map((a) => a.status)).toEqual([200, 200, 200]);
  }, 120_000);
});
