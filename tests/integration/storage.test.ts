/**
 * Storage contract, run against the Redis storage (a private redis-server) and the in-memory storage used by
 * replay: both must make the same decisions. Population sums kept incrementally are checked against
 * `populationBands`, which computes the same statistics from scratch.
 */
import { afterAll, beforeAll, beforeEach, describe, expect, it } from 'vitest';
import { populationBands } from '../../src/analysis/populationStats.ts';
import { parseConfig } from '../../src/domain/configFile.ts';
import { parseResultEvent, type ResultEvent, type Sample } from '../../src/domain/event.ts';
import { resolveSettings } from '../../src/domain/settings.ts';
import { MemoryStorage } from '../../src/storage/memoryStorage.ts';
import { bandContributions, bandStatsFromSums } from '../../src/storage/populationSums.ts';
import { RedisStorage } from '../../src/storage/redisStorage.ts';
import type { Placement, Storage } from '../../src/storage/storage.ts';
import { startRedisServer, type RedisServer } from '../helpers/redisServer.ts';

const config = parseConfig(`
population:
  measurands: [Fe, Cu, Si]
  bandHours: [0, 250, 500]
`);
const percentileConfig = parseConfig(`
population:
  method: percentile
  measurands: [Fe]
`);

function sample(e: Partial<ResultEvent> & { sampleId: string }): Sample {
  const parsed = parseResultEvent({ unit: 'U-1', component: 'gearbox', sampledAt: '2025-01-01T00:00:00Z', readings: { Fe: 10 }, ...e });
  if (!parsed.ok) throw new Error(JSON.stringify(parsed.issues));
  return parsed.sample;
}

function placementOf(s: Sample, cfg = config): Placement {
  const settings = resolveSettings(cfg, s);
  return { group: settings.group, contributions: bandContributions(s, settings.population), keepValues: settings.population.method === 'percentile' };
}

let server: RedisServer;
let prefixCounter = 0;

beforeAll(async () => {
  server = await startRedisServer();
});
afterAll(async () => {
  await server?.dispose();
});

const implementations: Array<[string, () => Storage]> = [
  ['redis', () => new RedisStorage(server.client(), { prefix: `{t${++prefixCounter}}` })],
  ['memory', () => new MemoryStorage()],
];

describe.each(implementations)('%s storage', (_name, make) => {
  let store: Storage;
  beforeEach(() => {
    store = make();
  });

  it('stores a result once: a redelivery changes nothing and says so', async () => {
    const s = sample({ sampleId: 'L-1', oilHours: 100, readings: { Fe: 12, Cu: 3 } });
    expect(await store.store(s, placementOf(s))).toEqual({ status: 'new', evaluationDue: true });
    const before = { revisions: await store.revisions(s), population: await store.population('gearbox'), mark: await store.mark(s) };
    // Same result, readings listed in another order: still the same result.
    const again = sample({ sampleId: 'L-1', oilHours: 100, readings: { Cu: 3, Fe: 12 } });
    expect((await store.store(again, placementOf(again))).status).toBe('duplicate');
    expect(await store.revisions(s)).toEqual(before.revisions);
    expect(await store.population('gearbox')).toEqual(before.population);
    expect(await store.mark(s)).toBe(before.mark);
  });

  it('reports a conflicting result under the same revision and keeps the stored one', async () => {
    const s = sample({ sampleId: 'L-2', readings: { Fe: 12 } });
    await store.store(s, placementOf(s));
    const other = sample({ sampleId: 'L-2', readings: { Fe: 99 } });
    expect((await store.store(other, placementOf(other))).status).toBe('conflict');
    expect((await store.revisions(s)).map((r) => r.readings.Fe)).toEqual([{ kind: 'value', value: 12 }]);
  });

  it('a higher revision replaces the readings and the population share; a lower one afterwards is history only', async () => {
    const r0 = sample({ sampleId: 'L-3', revision: 0, oilHours: 300, readings: { Fe: 40 } });
    const r2 = sample({ sampleId: 'L-3', revision: 2, oilHours: 300, readings: { Fe: 20 } });
    const r1 = sample({ sampleId: 'L-3', revision: 1, oilHours: 300, readings: { Fe: 30 } });
    expect((await store.store(r0, placementOf(r0))).status).toBe('new');
    expect((await store.store(r2, placementOf(r2))).status).toBe('replacement');
    expect((await store.store(r1, placementOf(r1))).status).toBe('superseded');
    expect((await store.revisions(r0)).map((r) => r.revision).sort()).toEqual([0, 1, 2]);
    const band = (await store.population('gearbox')).Fe?.get(250);
    expect(band).toMatchObject({ n: 1, sum: 20, sumSq: 400 });
    const entry = await store.component(r0);
    expect(entry).toEqual({ unit: 'U-1', component: 'gearbox', group: 'gearbox', samples: 1, lastSampledAt: '2025-01-01T00:00:00.000Z' });
  });

  it('keeps population statistics equal to a computation from scratch, whatever the order of arrival', async () => {
    const events: Sample[] = [];
    for (let i = 0; i < 60; i++) {
      const unit = `U-${i % 5}`;
      events.push(
        sample({
          unit,
          sampleId: `P-${i}`,
          sampledAt: new Date(Date.UTC(2025, 0, 1 + i)).toISOString(),
          oilHours: (i * 37) % 700,
          readings: { Fe: 5 + ((i * 13) % 17) + i / 10, Cu: i % 3 === 0 ? '<1' : 2 + (i % 4), Si: 3 + (i % 5) },
        }),
      );
      // Every fifth result is re-issued with corrected readings.
      if (i % 5 === 0) events.push(sample({ unit, sampleId: `P-${i}`, revision: 1, sampledAt: new Date(Date.UTC(2025, 0, 1 + i)).toISOString(), oilHours: (i * 37) % 700, readings: { Fe: 50 + i } }));
    }
    const shuffled = [...events].sort((a, b) => ((a.time * 7919 + a.revision) % 101) - ((b.time * 7919 + b.revision) % 101));
    for (const s of shuffled) await store.store(s, placementOf(s));
    const population = resolveSettings(config, { unit: 'U-0', component: 'gearbox' }).population;
    const incremental = bandStatsFromSums(await store.population('gearbox'), population);
    const scratch = populationBands(events, population, ['Fe', 'Cu', 'Si']);
    for (const m of ['Fe', 'Cu', 'Si'] as const) {
      const a = incremental[m]!;
      const b = scratch[m]!;
      expect(a.map((x) => [x.fromHours, x.toHours, x.n])).toEqual(b.map((x) => [x.fromHours, x.toHours, x.n]));
      a.forEach((x, i) => {
        expect(x.mean).toBeCloseTo(b[i]!.mean, 9);
        expect(x.sd).toBeCloseTo(b[i]!.sd, 9);
      });
    }
    expect((await store.components()).map((c) => [c.unit, c.samples])).toEqual([0, 1, 2, 3, 4].map((u) => [`U-${u}`, 12]));
  });

  it('keeps the values for the percentile method and swaps a replaced value', async () => {
    const a = sample({ sampleId: 'V-1', oilHours: 10, readings: { Fe: 7 } });
    const b = sample({ sampleId: 'V-2', oilHours: 20, readings: { Fe: 3 } });
    const a1 = sample({ sampleId: 'V-1', revision: 1, oilHours: 10, readings: { Fe: 9 } });
    for (const s of [a, b, a1]) await store.store(s, placementOf(s, percentileConfig));
    const population = resolveSettings(percentileConfig, a).population;
    const bands = bandStatsFromSums(await store.population('gearbox'), population);
    expect(bands.Fe![0]!.values).toEqual([3, 9]);
    const scratch = populationBands([a, b, a1], population, ['Fe']).Fe![0]!;
    expect(bands.Fe![0]).toMatchObject({ n: scratch.n, mean: scratch.mean, values: scratch.values });
    expect(bands.Fe![0]!.sd).toBeCloseTo(scratch.sd, 10);
  });

  it('evaluation lock: one holder at a time, released only by its holder, commits refused after loss', async () => {
    const ref = { unit: 'U-9', component: 'engine' };
    const s = sample({ ...ref, sampleId: 'K-1' });
    await store.store(s, placementOf(s));
    const lease = await store.acquire(ref, 10_000);
    expect(lease).toBeDefined();
    expect(await store.acquire(ref, 10_000)).toBeUndefined();
    const intruder = { key: lease!.key, token: 'not-mine' };
    await store.release(intruder);
    expect(await store.acquire(ref, 10_000)).toBeUndefined();
    expect(await store.commit(ref, intruder, { mark: 1, steps: [], group: 'engine', baselines: {} })).toBe(false);
    expect(await store.commit(ref, lease!, { mark: 1, steps: [], group: 'engine', baselines: {}, fed: { sampleId: 'K-1', time: s.time } })).toBe(true);
    expect(await store.lastFed(ref)).toEqual({ sampleId: 'K-1', time: s.time });
    // A redelivery after the evaluation is committed owes no evaluation.
    expect(await store.store(s, placementOf(s))).toEqual({ status: 'duplicate', evaluationDue: false });
    await store.release(lease!);
    expect(await store.acquire(ref, 10_000)).toBeDefined();
  });

  it('findings log: later evaluations overwrite and clear steps, and the log is bounded', async () => {
    const ref = { unit: 'U-8', component: 'engine' };
    const s = sample({ ...ref, sampleId: 'F-1' });
    await store.store(s, placementOf(s));
    const lease = (await store.acquire(ref, 10_000))!;
    const finding = { unit: 'U-8', component: 'engine', group: 'engine', measurand: 'Fe' as const, rule: 'limit' as const, severity: 'alarm' as const, value: 1, basis: 'reading', sampleId: 'F-1', sampledAt: s.sampledAt, explanation: 'x' };
    await store.commit(ref, lease, { mark: 1, group: 'engine', baselines: {}, steps: [{ sampleId: 'F-1', sampledAt: s.sampledAt, findings: [finding] }] });
    expect((await store.findings(ref)).map((x) => x.sampleId)).toEqual(['F-1']);
    await store.commit(ref, lease, { mark: 1, group: 'engine', baselines: {}, steps: [{ sampleId: 'F-1', sampledAt: s.sampledAt, findings: [] }] });
    expect(await store.findings(ref)).toEqual([]);
  });

  it('baseline sums follow the component into its current group', async () => {
    const ref = { unit: 'U-7', component: 'engine' };
    const s = sample({ ...ref, sampleId: 'B-1' });
    await store.store(s, placementOf(s));
    const lease = (await store.acquire(ref, 10_000))!;
    const sums = { intervals: 8, sumHours: 2000, sumHoursSq: 5e5, sumIncrement: 80, sumIncrementSq: 900, sumIncrementHours: 2e4, sumLabVariance: 16 };
    await store.commit(ref, lease, { mark: 1, group: 'g-a', baselines: { Fe: sums }, steps: [] });
    expect(await store.groupBaselines('g-a')).toEqual([['U-7/engine', { Fe: sums }]]);
    await store.commit(ref, lease, { mark: 1, group: 'g-b', baselines: { Fe: sums }, steps: [] });
    expect(await store.groupBaselines('g-a')).toEqual([]);
    expect(await store.groupBaselines('g-b')).toEqual([['U-7/engine', { Fe: sums }]]);
  });
});
