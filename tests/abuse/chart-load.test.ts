/**
 * Charts cannot stall the process: a viewer asking for the chart of a 50 000-sample history (minutes of work drawn
 * on the event loop before) gets an answer within the chart time limit — the chart, or 503 with Retry-After — while
 * /healthz keeps answering; charts over the drawing budget show the latest samples and say so; requests beyond the
 * pool's threads and queue are refused at once. Real HTTP on 127.0.0.1, real worker threads; bounds generous.
 */
import Fastify, { type FastifyInstance } from 'fastify';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { Sample } from '../../src/domain/event.ts';
import { healthRoutes } from '../../src/http/healthRoutes.ts';
import { seriesRoutes } from '../../src/http/seriesRoutes.ts';
import { ChartPool } from '../../src/render/chartPool.ts';
import { inputOf, type ComponentInput } from '../../src/render/componentInput.ts';
import { CONFIG } from '../unit/chart-fixtures.ts';
import { sample, settingsFrom } from '../unit/history-fixtures.ts';
import { healthProbe } from '../helpers/healthProbe.ts';
import { accessTokensFromEnv } from '../../src/runtime/accessTokensFromEnv.ts';

/** The API's tokens, handed to the routes (never written into the process environment). */
const tokenEnv: NodeJS.ProcessEnv = {};

const TIME_LIMIT_MS = 5000;
// /healthz answers while an attack runs: bounded for a loaded two-core machine (2.4 s seen with two suites and other
// jobs beside), yet far below what the attacks did before their fixes (a 16 s stall, refused for two minutes, 262 s).
const HEALTHZ_MAX_MS = 10_000;
const ANSWER_WITHIN_MS = TIME_LIMIT_MS + 60_000;
/** Generous: the 50 000 samples are cloned to the chart thread, which holds its own heap. */
const MEMORY_GROWTH_MAX = 1024 * 1024 * 1024;

/** An invented gearbox history: eight samples per oil charge, iron rising along each charge. */
function history(n: number): Sample[] {
  const samples: Sample[] = [];
  for (let i = 0; i < n; i++) {
    const onCharge = i % 8;
    samples.push(sample(i + 1, { sampleId: `S-${i}`, oilHours: 250 * (onCharge + 1), oilChanged: onCharge === 0 && i > 0, readings: { Fe: 5 + onCharge * 3 + (i % 5) } }));
  }
  return samples;
}

const settings = settingsFrom(CONFIG);
const inputs = new Map<string, ComponentInput>();
let app: FastifyInstance;
let base: string;
let pool: ChartPool;
/** Without a tight time limit, for the checks of what is drawn (a slow machine must not make them pass vacuously). */
let patient: ChartPool;
const saved = { ...process.env };
const viewer = { authorization: 'Bearer chart-viewer-4f1e' };

beforeAll(async () => {
  tokenEnv.WEARSHIFT_TOKEN_VIEWER = 'chart-viewer-4f1e';
  for (const [unit, n] of [['LONG-50K', 50_000], ['MID-3K', 3000], ['SHORT-40', 40]] as const) {
    const samples = history(n);
    inputs.set(unit, inputOf({ unit, component: 'gearbox', group: settings.group, samples: n, lastSampledAt: samples.at(-1)!.sampledAt }, settings, samples));
  }
  pool = new ChartPool({ concurrency: 1, queue: 2, timeoutMs: TIME_LIMIT_MS, sampleBudget: 1000 });
  app = Fastify();
  await app.register(healthRoutes, { ping: async () => 'PONG' });
  patient = new ChartPool({ concurrency: 1, queue: 4, timeoutMs: 10 * 60_000, sampleBudget: 1000 });
  await app.register(seriesRoutes, { tokens: accessTokensFromEnv(tokenEnv), loadInput: async (unit) => inputs.get(unit), pool });
  await app.register(seriesRoutes, { tokens: accessTokensFromEnv(tokenEnv), loadInput: async (unit) => inputs.get(unit), pool: patient, prefix: '/patient' });
  base = await app.listen({ host: '127.0.0.1', port: 0 });
}, 120_000);

afterAll(async () => {
  process.env = saved;
  await app?.close();
  await pool?.close();
  await patient?.close();
});

const startProbe = () => healthProbe(base, 50);

describe('chart rendering under load', () => {
  it('answers for a 50 000-sample history within the time limit while /healthz keeps answering', async () => {
    const probe = startProbe();
    const rssBefore = process.memoryUsage().rss;
    const t0 = performance.now();
    const answers: string[] = [];
    for (const format of ['svg', 'png']) {
      const asked = performance.now();
      const res = await fetch(`${base}/v1/units/LONG-50K/components/gearbox/chart.${format}?measurand=Fe`, { headers: viewer, signal: AbortSignal.timeout(ANSWER_WITHIN_MS) });
      const body = Buffer.from(await res.arrayBuffer());
      answers.push(`chart.${format} ${res.status} in ${(performance.now() - asked).toFixed(0)} ms`);
      // Either drawn (over the latest 1 000 samples) or abandoned at the time limit; never a stall, never a 500.
      expect([200, 503]).toContain(res.status);
      if (res.status === 503) expect(res.headers.get('retry-after')).toMatch(/^\d+$/);
      else expect(body.length).toBeLessThan(2 * 1024 * 1024);
    }
    const asked = performance.now();
    const series = await fetch(`${base}/v1/units/LONG-50K/components/gearbox/series?measurand=Fe`, { headers: viewer, signal: AbortSignal.timeout(ANSWER_WITHIN_MS) });
    await series.arrayBuffer();
    answers.push(`series ${series.status} in ${(performance.now() - asked).toFixed(0)} ms`);
    expect([200, 503]).toContain(series.status);
    expect(performance.now() - t0).toBeLessThan(3 * ANSWER_WITHIN_MS);
    const health = await probe.stop();
    expect(health.failures).toEqual([]);
    expect(health.answered).toBeGreaterThan(3);
    expect(health.slowest).toBeLessThan(HEALTHZ_MAX_MS);
    expect(process.memoryUsage().rss - rssBefore).toBeLessThan(MEMORY_GROWTH_MAX);
    // The figures (an answer within 1 s, /healthz under 100 ms) are measured and reported here, not asserted:
    // they depend on the machine; the assertions above are the generous bounds.
    console.info(`50k-sample chart: ${answers.join(', ')}; /healthz answered ${health.answered} times, slowest ${health.slowest.toFixed(0)} ms; rss +${((process.memoryUsage().rss - rssBefore) / 1e6).toFixed(0)} MB`);
  }, 300_000);

  it('draws a history over the budget over its latest samples, and says so in the heading', async () => {
    const res = await fetch(`${base}/patient/v1/units/MID-3K/components/gearbox/chart.svg?measurand=Fe`, { headers: viewer });
    const svg = await res.text();
    expect(res.status).toBe(200);
    expect(svg).toContain('latest 1000 of 3000 samples');
    // Samples S-2000 to S-2999 are drawn (each reading's tooltip names its sample); nothing older appears.
    expect(svg).toContain('>S-2000: ');
    expect(svg).toContain('>S-2999: ');
    expect(svg).not.toContain('>S-1999: ');
    const small = await fetch(`${base}/patient/v1/units/SHORT-40/components/gearbox/chart.svg?measurand=Fe`, { headers: viewer });
    expect(small.status).toBe(200);
    expect(await small.text()).not.toMatch(/latest \d+ of \d+ samples/);
  }, 300_000);

  it('refuses at once what exceeds the threads and the queue, with 503 and Retry-After', async () => {
    const answers = await Promise.all(
      Array.from({ length: 10 }, () =>
        fetch(`${base}/v1/units/LONG-50K/components/gearbox/chart.svg?measurand=Fe`, { headers: viewer, signal: AbortSignal.timeout(4 * ANSWER_WITHIN_MS) }).then(async (r) => ({
          status: r.status,
          retryAfter: r.headers.get('retry-after'),
          body: await r.text(),
        })),
      ),
    );
    const busy = answers.filter((a) => a.status === 503 && a.body.includes('waiting'));
    // One running and two waiting at most: at least seven of ten refused as busy.
    expect(busy.length).toBeGreaterThanOrEqual(7);
    expect(answers.every((a) => a.status === 200 || (a.status === 503 && a.retryAfter !== null))).toBe(true);
  }, 600_000);

  it('takes measurand=Fe&measurand=Cu as a list instead of failing', async () => {
    const res = await fetch(`${base}/patient/v1/units/SHORT-40/components/gearbox/series?measurand=Fe&measurand=Cu`, { headers: viewer });
    expect(res.status).toBe(200);
    const body = (await res.json()) as { measurands: { measurand: string }[] };
    expect(body.measurands.map((m) => m.measurand)).toContain('Fe');
    const unknown = await fetch(`${base}/patient/v1/units/SHORT-40/components/gearbox/series?measurand=Fe&measurand=Xx`, { headers: viewer });
    expect(unknown.status).toBe(400);
  });
});
