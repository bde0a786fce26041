/**
 * A chart or series of a long history is computed from the stored checkpoint before its latest samples, not from the
 * first sample (src/pipeline/viewStart.ts, src/render/componentInput.ts): the samples read and folded are bounded by
 * the drawing budget, and what is drawn is exactly what the whole history gives for those samples. Run against the
 * Redis store (a private redis-server) and the in-memory store of replay; the whole-history view is the reference.
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { parseConfig } from '../../src/domain/configFile.ts';
import type { ResultEvent } from '../../src/domain/event.ts';
import { incidentRules } from '../../src/incidents/policy.ts';
import { evaluateStored } from '../../src/pipeline/evaluateStored.ts';
import { MemoryStore } from '../../src/pipeline/memory/memoryStore.ts';
import type { ComponentStore, GroupLedger } from '../../src/pipeline/ports.ts';
import { storeResult } from '../../src/pipeline/storeResult.ts';
import { RedisStore } from '../../src/redis/redisStore.ts';
import { runChartJob } from '../../src/render/chartJob.ts';
import { componentInput } from '../../src/render/componentInput.ts';
import { seededRandom } from '../../src/simulation/random.ts';
import { simulateWearSeries } from '../../src/simulation/wearSeries.ts';
import { startRedisServer, type RedisServer } from '../helpers/redisServer.ts';

const GROUP = 'bounded-gearboxes';
const config = parseConfig(`
backfill: { quietAfterDays: 100000 }
groups:
  - name: ${GROUP}
    sumpLitres: 120
    residualFraction: 0.1
    limits:
      Fe: { caution: 60, alarm: 100 }
`);
const SAMPLES = 700;
const LATEST = 200;
const ref = { unit: 'BV-1', component: 'gearbox' };

/** An invented gearbox: 700 samples about 60 operating hours apart, its iron wear rate doubling at 38 000 h. */
function history(): ResultEvent[] {
  const now = Date.now();
  return simulateWearSeries(
    {
      ...ref,
      group: GROUP,
      samples: SAMPLES,
      metals: {
        Fe: { rate: 0.04, processVariance: 0.016, step: { atHours: 38_000, factor: 2 } },
        Cu: { rate: 0.01, processVariance: 0.004 },
      },
      labNoise: { absolute: 1, relative: 0.05 },
      intervalHours: 60,
      jitter: 0.3,
      drainHours: 1000,
      residualFraction: 0.1,
      sumpLitres: 120,
      topUpPer100h: 0.5,
      startTime: now - (SAMPLES + 2) * 60 * 1.3 * 3_600_000,
      decimals: 1,
      sampleIdPrefix: 'BV',
    },
    seededRandom(7),
  ).map((s) => s.event);
}

let server: RedisServer;
let prefixes = 0;
beforeAll(async () => {
  server = await startRedisServer();
});
afterAll(async () => {
  await server?.dispose();
});

const stores: [string, () => ComponentStore & GroupLedger][] = [
  ['redis', () => new RedisStore(server.client(), { prefix: `{bounded${++prefixes}}`, config })],
  ['memory', () => new MemoryStore({ config })],
];

describe.each(stores)('bounded view of a long history (%s store)', (_, makeStore) => {
  it('starts from a stored checkpoint before the latest samples, and draws what the whole history gives', async () => {
    const store = makeStore();
    const events = history();
    const now = Date.now();
    for (const e of events) await storeResult(store, config, e, now);
    const evaluated = await evaluateStored({ store, ledger: store, config, rules: incidentRules(config), now: Date.now }, ref);
    expect(evaluated.kind).toBe('evaluated');

    const whole = (await componentInput(store, store, config, ref))!;
    const bounded = (await componentInput(store, store, config, ref, { latestSamples: LATEST }))!;
    expect(whole.start).toBeUndefined();
    expect(whole.samples).toHaveLength(SAMPLES);
    // The latest checkpoint at least LATEST samples back: fewer samples read, never fewer than asked for.
    expect(bounded.start).toBeDefined();
    expect(bounded.start!.samples).toBeLessThanOrEqual(SAMPLES - LATEST);
    expect(bounded.samples.length + bounded.start!.samples).toBe(SAMPLES);
    expect(bounded.samples.length).toBeGreaterThanOrEqual(LATEST);
    expect(bounded.samples.length).toBeLessThan(SAMPLES / 2);

    type Series = { measurands: { measurand: string; rates: { points: { sampledAt: string }[] } | null; cusum: { points: { sampledAt: string }[] } | null; ewma: { points: { sampledAt: string }[] } | null; marks: { sampledAt: string }[] }[]; earlierSamples?: number };
    const seriesOf = (input: typeof whole) => {
      const r = runChartJob({ kind: 'series', input }, 1000);
      if (r.kind !== 'series') throw new Error(r.kind);
      return JSON.parse(r.json) as Series;
    };
    const full = seriesOf(whole);
    const part = seriesOf(bounded);
    expect(full.earlierSamples).toBeUndefined();
    expect(part.earlierSamples).toBe(bounded.start!.samples);
    const from = bounded.samples[0]!.sampledAt;
    const since = <T extends { sampledAt: string }>(points: readonly T[] | undefined) => (points ?? []).filter((p) => Date.parse(p.sampledAt) >= Date.parse(from));
    let compared = 0;
    for (const m of part.measurands) {
      const reference = full.measurands.find((x) => x.measurand === m.measurand)!;
      expect(m.cusum?.points).toEqual(since(reference.cusum?.points));
      expect(m.ewma?.points).toEqual(since(reference.ewma?.points));
      expect(since(m.rates?.points)).toEqual(since(reference.rates?.points));
      expect(m.marks).toEqual(since(reference.marks));
      compared += m.cusum?.points.length ?? 0;
    }
    expect(compared).toBeGreaterThan(0);
    // The iron change in the window is marked there as in the whole history.
    expect(part.measurands.find((m) => m.measurand === 'Fe')!.marks.length).toBeGreaterThan(0);

    // The chart says it shows the latest samples of the whole history, not of what was read.
    const chart = runChartJob({ kind: 'chart', format: 'svg', input: bounded, measurand: 'Fe', width: 800, title: true }, LATEST);
    if (chart.kind !== 'svg') throw new Error(chart.kind);
    expect(chart.of).toBe(SAMPLES);
    expect(chart.shown).toBe(LATEST);
    expect(chart.svg).toContain(`latest ${LATEST} of ${SAMPLES} samples`);
  }, 300_000);

  it('reads the whole history while a result before the checkpoint waits to be evaluated', async () => {
    const store = makeStore();
    const events = history().slice(0, 500);
    const now = Date.now();
    for (const e of events) await storeResult(store, config, e, now);
    await evaluateStored({ store, ledger: store, config, rules: incidentRules(config), now: Date.now }, ref);
    expect((await componentInput(store, store, config, ref, { latestSamples: 100 }))!.start).toBeDefined();
    // A corrected early result: every checkpoint after it is stale until the component is evaluated again.
    const early = events[20]!;
    await storeResult(store, config, { ...early, revision: 2, readings: { ...early.readings, Cu: 3.3 } }, now);
    const input = (await componentInput(store, store, config, ref, { latestSamples: 100 }))!;
    expect(input.start).toBeUndefined();
    expect(input.samples).toHaveLength(500);
  }, 300_000);
});
