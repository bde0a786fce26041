/**
 * The storage contract of the pipeline (src/pipeline/ports.ts), run against the Redis store (a private
 * redis-server, with one partition and with several) and the in-memory store of replay: both must make the same
 * decisions. The group statistics kept as month buckets are checked against `populationBands`, which computes the
 * same statistics from scratch.
 */
import { afterAll, beforeAll, beforeEach, describe, expect, it } from 'vitest';
import { populationBands, populationMeasurands } from '../../src/analysis/populationStats.ts';
import { emptyAnalysisState } from '../../src/analysis/fold/analysisFold.ts';
import { parseConfig } from '../../src/domain/configFile.ts';
import { parseResultEvent, type ResultEvent, type Sample } from '../../src/domain/event.ts';
import { resolveSettings } from '../../src/domain/settings.ts';
import { emptyComponentIncidents } from '../../src/incidents/model.ts';
import { positionOf } from '../../src/incidents/verdict.ts';
import { populationShare, monthOf } from '../../src/pipeline/groupShares.ts';
import { MemoryStore } from '../../src/pipeline/memory/memoryStore.ts';
import type { Checkpoint, ComponentStore, EvaluationCommit, GroupLedger, Lease, StepRecord } from '../../src/pipeline/ports.ts';
import { z2Form } from '../helpers/earlierStoredForms.ts';
import { COMMON_FIELD, componentKeys } from '../../src/redis/keys.ts';
import { positionText, RedisStore } from '../../src/redis/redisStore.ts';
import { revisionConflicts } from '../../src/redis/revisionConflicts.ts';
import { encodeSample } from '../../src/pipeline/sampleCodec.ts';
import { startRedisServer, type RedisServer } from '../helpers/redisServer.ts';

const config = parseConfig(`
population:
  measurands: [Fe, Cu, Si]
  bandHours: [0, 250, 500]
`);

function sample(e: Partial<ResultEvent> & { sampleId: string }): Sample {
  const parsed = parseResultEvent({ unit: 'U-1', component: 'gearbox', sampledAt: '2025-01-01T00:00:00Z', readings: { Fe: 10 }, ...e });
  if (!parsed.ok) throw new Error(JSON.stringify(parsed.issues));
  return parsed.sample;
}

let server: RedisServer;
let prefixCounter = 0;

beforeAll(async () => {
  server = await startRedisServer();
});
afterAll(async () => {
  await server?.dispose();
});

type Store = ComponentStore & GroupLedger;

const implementations: Array<[string, () => Store]> = [
  ['redis, one partition', () => new RedisStore(server.client(), { prefix: `{t${++prefixCounter}}`, config })],
  ['redis, five partitions', () => new RedisStore(server.client(), { prefix: `{t${++prefixCounter}}`, partitions: 5, config })],
  ['memory', () => new MemoryStore({ config })],
];

const GROUP = 'gearbox';

/** A commit that records the samples' population shares and nothing else changes. */
function commitOf(samples: readonly Sample[], mark: number, extra: Partial<EvaluationCommit> = {}): EvaluationCommit {
  const ref = samples[0]!;
  const settings = resolveSettings(config, ref);
  const last = samples.at(-1)!;
  return {
    mark,
    group: GROUP,
    latest: { position: positionOf(last), count: samples.length, analysis: emptyAnalysisState(ref.unit, ref.component), incidents: emptyComponentIncidents(ref.unit, ref.component) },
    sparse: [],
    rewoundTo: undefined,
    steps: [],
    shares: samples.map((s) => ({ sampleId: s.sampleId, month: monthOf(s.time), values: populationShare(s, settings) })),
    baselines: {},
    incidents: emptyComponentIncidents(ref.unit, ref.component),
    incidentsVersion: 0,
    effects: [],
    archived: [],
    withdrawn: [],
    horizon: last.time,
    ...extra,
  };
}

describe.each(implementations)('%s store', (_name, make) => {
  let store: Store;
  beforeEach(() => {
    store = make();
  });

  it('stores a result once: a redelivery changes nothing and says so; the same sample and revision with other content is a conflict', async () => {
    const s = sample({ sampleId: 'L-1', oilHours: 100, readings: { Fe: 12, Cu: 3 } });
    expect(await store.store(s, GROUP, 1000)).toEqual({ status: 'new', evaluationDue: true });
    const before = { revisions: await store.revisions(s), input: await store.evaluationInput(s) };
    // Same result, readings listed in another order: still the same result.
    const again = sample({ sampleId: 'L-1', oilHours: 100, readings: { Cu: 3, Fe: 12 } });
    expect((await store.store(again, GROUP, 2000)).status).toBe('duplicate');
    expect(await store.revisions(s)).toEqual(before.revisions);
    expect((await store.evaluationInput(s))!.mark).toBe(before.input!.mark);
    const other = sample({ sampleId: 'L-1', oilHours: 100, readings: { Fe: 99 } });
    expect((await store.store(other, GROUP, 3000)).status).toBe('conflict');
    expect((await store.revisions(s)).map((r) => r.sample.readings.Fe)).toEqual([{ kind: 'value', value: 12 }]);
    // The stored sample is the validated one, with the time it first arrived.
    expect(before.revisions).toEqual([{ sample: s, receivedAt: 1000 }]);
  });

  it('hands back the winning revisions after a position, in history order; a lower revision afterwards is history only', async () => {
    const a = sample({ sampleId: 'A', sampledAt: '2025-01-03T00:00:00Z', unitHours: 300 });
    const b = sample({ sampleId: 'B', sampledAt: '2025-01-01T00:00:00Z', unitHours: 100 });
    const c = sample({ sampleId: 'C', sampledAt: '2025-01-02T00:00:00Z' });
    for (const s of [a, b, c]) await store.store(s, GROUP, 1);
    const b1 = sample({ sampleId: 'B', revision: 1, sampledAt: '2025-01-01T00:00:00Z', unitHours: 100, readings: { Fe: 20 } });
    expect((await store.store(b1, GROUP, 2)).status).toBe('replacement');
    expect((await store.store(b, GROUP, 3)).status).toBe('duplicate');
    const b0late = sample({ sampleId: 'B', revision: 0, sampledAt: '2025-01-01T00:00:00Z', unitHours: 100, readings: { Fe: 5 } });
    expect((await store.store(b0late, GROUP, 4)).status).toBe('conflict');
    expect((await store.samplesAfter(a, null)).map((s) => `${s.sample.sampleId}/${s.sample.revision}`)).toEqual(['B/1', 'C/0', 'A/0']);
    expect((await store.samplesAfter(a, positionOf(c))).map((s) => s.sample.sampleId)).toEqual(['A']);
    expect((await store.revisions(a)).length).toBe(4);
    expect(await store.component(a)).toMatchObject({ unit: 'U-1', component: 'gearbox', group: GROUP, samples: 3, lastSampledAt: a.sampledAt });
  });

  it('marks the earliest changed position and clears it only when the commit covers every change', async () => {
    const first = sample({ sampleId: 'S-2', sampledAt: '2025-02-01T00:00:00Z' });
    await store.store(first, GROUP, 1);
    const input = (await store.evaluationInput(first))!;
    expect(input.dirtyFrom).toEqual(positionOf(first));
    const late = sample({ sampleId: 'S-1', sampledAt: '2025-01-01T00:00:00Z' });
    await store.store(late, GROUP, 2);
    expect((await store.evaluationInput(first))!.dirtyFrom).toEqual(positionOf(late));
    const lease = (await store.acquire(first, 10_000))!;
    // Committed with the mark read before the late result: the change after it stays marked.
    expect((await store.commit(first, lease, commitOf([late, first], input.mark))).ok).toBe(true);
    expect((await store.evaluationInput(first))!.dirtyFrom).toEqual(positionOf(late));
    const now = (await store.evaluationInput(first))!;
    const again = await store.commit(first, lease, commitOf([late, first], now.mark, { incidentsVersion: 1 }));
    expect(again.ok).toBe(true);
    expect((await store.evaluationInput(first))!.dirtyFrom).toBeUndefined();
    await store.release(lease);
  });

  it('keeps the lock to one holder, and refuses a commit under a lost lock or after the incidents moved on', async () => {
    const s = sample({ sampleId: 'K-1' });
    await store.store(s, GROUP, 1);
    const lease = (await store.acquire(s, 60_000))!;
    expect(await store.acquire(s, 60_000)).toBeUndefined();
    expect(await store.renew(lease, 60_000)).toBe(true);
    const intruder: Lease = { key: lease.key, token: 'not-mine' };
    expect(await store.commit(s, intruder, commitOf([s], 1))).toEqual({ ok: false, reason: 'lost-lock' });
    expect(await store.commit(s, lease, commitOf([s], 1, { incidentsVersion: 7 }))).toEqual({ ok: false, reason: 'incidents-changed' });
    expect((await store.commit(s, lease, commitOf([s], 1))).ok).toBe(true);
    await store.release(lease);
    expect(await store.acquire(s, 60_000)).toBeDefined();
  });

  it('takes the lock with the input in one step, and a settled commit lets go of it only when nothing arrived meanwhile', async () => {
    const s = sample({ sampleId: 'W-1', sampledAt: '2025-02-01T00:00:00Z' });
    // No samples yet: the lock, and no input.
    const empty = await store.acquireWithInput(s, 60_000);
    expect(empty).toMatchObject({ input: undefined });
    await store.release(empty!.lease);
    await store.store(s, GROUP, 1);
    const held = (await store.acquireWithInput(s, 60_000))!;
    expect(held.input).toEqual(await store.evaluationInput(s));
    expect(held.input!.dirtyFrom).toEqual(positionOf(s));
    expect(await store.acquireWithInput(s, 60_000)).toBeUndefined();
    expect(await store.acquire(s, 60_000)).toBeUndefined();
    // A result arrives while the evaluation runs: the commit is not settled and keeps the lock.
    const next = sample({ sampleId: 'W-2', sampledAt: '2025-03-01T00:00:00Z' });
    await store.store(next, GROUP, 2);
    const first = await store.commit(s, held.lease, { ...commitOf([s], held.input!.mark), releaseWhenSettled: true });
    expect(first).toMatchObject({ ok: true, settled: false });
    expect(await store.acquire(s, 60_000)).toBeUndefined();
    expect((await store.evaluationInput(s))!.dirtyFrom).toBeDefined();
    // Covering everything: settled, and the lock is free in the same step.
    const now = (await store.evaluationInput(s))!;
    const second = await store.commit(s, held.lease, { ...commitOf([s, next], now.mark, { incidentsVersion: now.incidentsVersion }), releaseWhenSettled: true });
    expect(second).toMatchObject({ ok: true, settled: true });
    expect((await store.evaluationInput(s))!.dirtyFrom).toBeUndefined();
    const again = await store.acquire(s, 60_000);
    expect(again).toBeDefined();
    // Without asking, a settled commit keeps the lock.
    const latest = (await store.evaluationInput(s))!;
    expect(await store.commit(s, again!, { ...commitOf([s, next], latest.mark, { incidentsVersion: latest.incidentsVersion }) })).toMatchObject({ ok: true, settled: true });
    expect(await store.acquire(s, 60_000)).toBeUndefined();
    await store.release(again!);
  });

  it('keeps group statistics as of a month from other units only, equal to computing them from scratch', async () => {
    const mk = (unit: string, n: number, month: string, oilHours: number, fe: number, cu: number) =>
      sample({ unit, sampleId: `${unit}-${n}`, sampledAt: `${month}-1${n}T06:00:00Z`, oilHours, readings: { Fe: fe, Cu: cu, Si: '<2' } });
    const perUnit = {
      'U-1': [mk('U-1', 1, '2025-01', 100, 10, 2), mk('U-1', 2, '2025-02', 300, 15, 3), mk('U-1', 3, '2025-03', 600, 22, 4)],
      'U-2': [mk('U-2', 1, '2025-01', 120, 12, 1), mk('U-2', 2, '2025-02', 350, 18, 2), mk('U-2', 3, '2025-03', 620, 30, 5)],
      'U-3': [mk('U-3', 1, '2025-01', 90, 8, 2), mk('U-3', 2, '2025-03', 280, 11, 2)],
    };
    for (const [unit, samples] of Object.entries(perUnit)) {
      for (const s of samples) await store.store(s, GROUP, 1);
      const ref = { unit, component: 'gearbox' };
      const input = (await store.evaluationInput(ref))!;
      const lease = (await store.acquire(ref, 10_000))!;
      expect((await store.commit(ref, lease, commitOf(samples, input.mark))).ok).toBe(true);
      await store.release(lease);
    }
    const settings = resolveSettings(config, { unit: 'U-1', component: 'gearbox' });
    const measurands = populationMeasurands(settings.population);
    const asOf = await store.asOf(GROUP, '2025-03', { unit: 'U-1', component: 'gearbox' });
    // Other units' results sampled before March: U-2's and U-3's January and February results.
    const expected = populationBands([...perUnit['U-2'].slice(0, 2), ...perUnit['U-3'].slice(0, 1)], settings.population, measurands);
    for (const m of measurands) {
      expect(asOf.bands[m]!.map((b) => [b.n, b.mean, b.sd].map((x) => Number(x.toPrecision(10))))).toEqual(expected[m]!.map((b) => [b.n, b.mean, b.sd].map((x) => Number(x.toPrecision(10)))));
    }
    // January: nothing before it.
    expect((await store.asOf(GROUP, '2025-01', { unit: 'U-1', component: 'gearbox' })).bands.Fe!.every((b) => b.n === 0)).toBe(true);
    // Evaluated up to March: all three are found when January changes.
    expect((await store.membersAfter(GROUP, Date.parse('2025-02-01T00:00:00Z'))).map((r) => r.unit).sort()).toEqual(['U-1', 'U-2', 'U-3']);
    // How many others the group holds, for the readiness lines: a member does not count itself, a stranger counts all.
    expect(await store.othersIn(GROUP, { unit: 'U-1', component: 'gearbox' })).toBe(2);
    expect(await store.othersIn(GROUP, { unit: 'U-9', component: 'gearbox' })).toBe(3);
    expect(await store.othersIn('no-such-group', { unit: 'U-1', component: 'gearbox' })).toBe(0);
  });

  it('replaces a sample\u2019s share when its revision or its standing changes, and takes it out when it is left out', async () => {
    const ref = { unit: 'U-1', component: 'gearbox' };
    const s = sample({ sampleId: 'R-1', sampledAt: '2025-01-05T00:00:00Z', oilHours: 100, readings: { Fe: 10 } });
    const other = sample({ unit: 'U-9', sampleId: 'O-1', sampledAt: '2025-04-05T00:00:00Z', readings: { Fe: 1 } });
    await store.store(s, GROUP, 1);
    await store.store(other, GROUP, 1);
    const commitShares = async (shares: EvaluationCommit['shares']) => {
      const input = (await store.evaluationInput(ref))!;
      const lease = (await store.acquire(ref, 10_000))!;
      const r = await store.commit(ref, lease, { ...commitOf([s], input.mark, { incidentsVersion: input.incidentsVersion }), shares });
      await store.release(lease);
      return r;
    };
    const fe = async () => (await store.asOf(GROUP, '2025-04', { unit: 'U-9', component: 'gearbox' })).bands.Fe!.find((b) => b.fromHours === 0)!;
    await commitShares([{ sampleId: 'R-1', month: '2025-01', values: { 'Fe|0': 10 } }]);
    expect(await fe()).toMatchObject({ n: 1, mean: 10 });
    expect(await commitShares([{ sampleId: 'R-1', month: '2025-01', values: { 'Fe|0': 10 } }])).toEqual({ ok: true, settled: true });
    await commitShares([{ sampleId: 'R-1', month: '2025-01', values: { 'Fe|0': 14 } }]);
    expect(await fe()).toMatchObject({ n: 1, mean: 14 });
    expect(await commitShares([{ sampleId: 'R-1', month: '2025-01', values: null }])).toEqual({ ok: true, settled: true, changedMonth: '2025-01' });
    expect((await fe()).n).toBe(0);
  });

  it('gives the statistics of the month anew when a bucket before it or the component\u2019s own share changes', async () => {
    const u1 = { unit: 'U-1', component: 'gearbox' };
    const u2 = { unit: 'U-2', component: 'gearbox' };
    const a = sample({ unit: 'U-1', sampleId: 'A-1', sampledAt: '2025-01-05T00:00:00Z', oilHours: 100, readings: { Fe: 10 } });
    const b = sample({ unit: 'U-2', sampleId: 'B-1', sampledAt: '2025-02-05T00:00:00Z', oilHours: 100, readings: { Fe: 20 } });
    await store.store(a, GROUP, 1);
    await store.store(b, GROUP, 1);
    const commitShare = async (s: Sample, fe: number) => {
      const input = (await store.evaluationInput(s))!;
      const lease = (await store.acquire(s, 10_000))!;
      await store.commit(s, lease, { ...commitOf([s], input.mark, { incidentsVersion: input.incidentsVersion }), shares: [{ sampleId: s.sampleId, month: monthOf(s.time), values: { 'Fe|0': fe } }] });
      await store.release(lease);
    };
    const fe = async (ref: typeof u1) => (await store.asOf(GROUP, '2025-04', ref)).bands.Fe!.find((x) => x.fromHours === 0)!;
    await commitShare(a, 10);
    await commitShare(b, 20);
    expect(await fe(u1)).toMatchObject({ n: 1, mean: 20 });
    expect(await fe(u2)).toMatchObject({ n: 1, mean: 10 });
    // Asked again with nothing changed: the same.
    expect(await fe(u1)).toMatchObject({ n: 1, mean: 20 });
    // The component's own share changes: what it is judged with does not, the others' does.
    await commitShare(a, 14);
    expect(await fe(u1)).toMatchObject({ n: 1, mean: 20 });
    expect(await fe(u2)).toMatchObject({ n: 1, mean: 14 });
    // Another component's share of an earlier month changes.
    await commitShare(b, 30);
    expect(await fe(u1)).toMatchObject({ n: 1, mean: 30 });
    expect((await store.asOf(GROUP, '2025-02', u1)).bands.Fe!.every((x) => x.n === 0)).toBe(true);
    expect((await store.asOf(GROUP, '2025-02', u2)).bands.Fe!.find((x) => x.fromHours === 0)).toMatchObject({ n: 1, mean: 14 });
    // A later month after an earlier one: the months between are added, the component's own share taken out.
    expect(await fe(u2)).toMatchObject({ n: 1, mean: 14 });
    const c = sample({ unit: 'U-3', sampleId: 'C-1', sampledAt: '2025-03-05T00:00:00Z', oilHours: 100, readings: { Fe: 40 } });
    await store.store(c, GROUP, 1);
    await commitShare(c, 40);
    expect(await fe(u2)).toMatchObject({ n: 2, mean: 27 });
    expect(await fe(u1)).toMatchObject({ n: 2, mean: 35 });
  });

  it('takes out its own shares of exactly the months it is judged against, also of a sample a revision moved to another month', async () => {
    const u1 = { unit: 'U-1', component: 'gearbox' };
    const fe = (stats: Awaited<ReturnType<Store['asOf']>>) => stats.bands.Fe!.find((x) => x.fromHours === 0)!;
    const own = [
      sample({ unit: 'U-1', sampleId: 'A-1', sampledAt: '2025-01-05T00:00:00Z', oilHours: 100, readings: { Fe: 10 } }),
      sample({ unit: 'U-1', sampleId: 'A-2', sampledAt: '2025-02-05T00:00:00Z', oilHours: 100, readings: { Fe: 12 } }),
      sample({ unit: 'U-1', sampleId: 'A-3', sampledAt: '2025-03-05T00:00:00Z', oilHours: 100, readings: { Fe: 14 } }),
    ];
    const others = [
      sample({ unit: 'U-2', sampleId: 'B-1', sampledAt: '2025-01-10T00:00:00Z', oilHours: 100, readings: { Fe: 100 } }),
      sample({ unit: 'U-2', sampleId: 'B-2', sampledAt: '2025-02-10T00:00:00Z', oilHours: 100, readings: { Fe: 200 } }),
    ];
    for (const samples of [own, others]) {
      for (const s of samples) await store.store(s, GROUP, 1);
      const input = (await store.evaluationInput(samples[0]!))!;
      const lease = (await store.acquire(samples[0]!, 10_000))!;
      expect((await store.commit(samples[0]!, lease, commitOf(samples, input.mark))).ok).toBe(true);
      await store.release(lease);
    }
    // Several months at once (one evaluation's samples span them): each from the other unit only.
    const months = await store.asOfMonths(GROUP, ['2025-02', '2025-03', '2025-04'], u1);
    expect([...months.keys()]).toEqual(['2025-02', '2025-03', '2025-04']);
    expect(fe(months.get('2025-02')!)).toMatchObject({ n: 1, mean: 100 });
    expect(fe(months.get('2025-03')!)).toMatchObject({ n: 2, mean: 150 });
    expect(fe(months.get('2025-04')!)).toMatchObject({ n: 2, mean: 150 });
    // A revision moves A-1 from January to March. Until the component's next commit its January share stays in the
    // group's January bucket, and it is still its own: taken out, not counted as another unit's.
    await store.store(sample({ unit: 'U-1', sampleId: 'A-1', revision: 2, sampledAt: '2025-03-20T00:00:00Z', oilHours: 100, readings: { Fe: 10 } }), GROUP, 1);
    expect(fe(await store.asOf(GROUP, '2025-02', u1))).toMatchObject({ n: 1, mean: 100 });
    expect(fe(await store.asOf(GROUP, '2025-05', u1))).toMatchObject({ n: 2, mean: 150 });
    // And the other unit sees all three of U-1's shares where they were committed.
    expect(fe(await store.asOf(GROUP, '2025-02', { unit: 'U-2', component: 'gearbox' }))).toMatchObject({ n: 1, mean: 10 });
    expect(fe(await store.asOf(GROUP, '2025-04', { unit: 'U-2', component: 'gearbox' }))).toMatchObject({ n: 3, mean: 12 });
  });

  it('keeps sparse checkpoints, drops those after a rewind, and finds the latest one before a position', async () => {
    const samples = Array.from({ length: 6 }, (_, i) => sample({ sampleId: `C-${i}`, sampledAt: `2025-01-0${i + 1}T00:00:00Z` }));
    for (const s of samples) await store.store(s, GROUP, 1);
    const ref = samples[0]!;
    const cp = (i: number): Checkpoint => ({ position: positionOf(samples[i]!), count: i + 1, analysis: emptyAnalysisState('U-1', 'gearbox'), incidents: emptyComponentIncidents('U-1', 'gearbox') });
    let lease = (await store.acquire(ref, 10_000))!;
    let input = (await store.evaluationInput(ref))!;
    await store.commit(ref, lease, commitOf(samples, input.mark, { sparse: [cp(1), cp(3), cp(5)] }));
    expect((await store.checkpointBefore(ref, positionOf(samples[4]!)))?.count).toBe(4);
    expect((await store.checkpointBefore(ref, positionOf(samples[1]!)))).toBeUndefined();
    input = (await store.evaluationInput(ref))!;
    await store.commit(ref, lease, commitOf(samples, input.mark, { incidentsVersion: 1, rewoundTo: positionOf(samples[2]!) }));
    await store.release(lease);
    expect((await store.checkpointBefore(ref, positionOf(samples[5]!)))?.count).toBe(2);
    lease = (await store.acquire(ref, 10_000))!;
    input = (await store.evaluationInput(ref))!;
    await store.commit(ref, lease, commitOf(samples, input.mark, { incidentsVersion: 2, rewoundTo: null }));
    await store.release(lease);
    expect(await store.checkpointBefore(ref, positionOf(samples[5]!))).toBeUndefined();
  });

  it('records what a responder said of a sample and marks the component for evaluation from it', async () => {
    const a = sample({ sampleId: 'M-1', sampledAt: '2025-01-01T00:00:00Z' });
    const b = sample({ sampleId: 'M-2', sampledAt: '2025-01-02T00:00:00Z' });
    await store.store(a, GROUP, 1);
    await store.store(b, GROUP, 1);
    const lease = (await store.acquire(a, 10_000))!;
    const input = (await store.evaluationInput(a))!;
    await store.commit(a, lease, commitOf([a, b], input.mark));
    await store.release(lease);
    expect((await store.evaluationInput(a))!.dirtyFrom).toBeUndefined();
    const given = { by: 'lab desk', at: '2025-01-03T08:00:00.000Z', after: 'M-2' };
    expect(await store.markSample(a, 'M-2', 'confirmed', given)).toBe(true);
    expect(await store.markSample(a, 'M-1', 'rejected')).toBe(true);
    expect(await store.markSample(a, 'no-such-sample', 'rejected', given)).toBe(false);
    const after = (await store.evaluationInput(a))!;
    expect(after.marks.get('M-2')).toBe('confirmed');
    expect(after.dirtyFrom).toEqual(positionOf(a));
    // Who gave a word, when and after which sample are kept with it (a word given without them has none).
    expect(await store.wordsGiven(a)).toEqual(new Map([['M-2', given]]));
    await store.markSample(a, 'M-2', null, given);
    expect((await store.evaluationInput(a))!.marks.has('M-2')).toBe(false);
    expect((await store.wordsGiven(a)).size).toBe(0);
    expect((await store.evaluationInput(a))!.marks.get('M-1')).toBe('rejected');
  });
});

describe('redis store, a store written by the earlier layout', () => {
  it('reads revisions stored in the earlier form, recognises their redelivery and conflicts, and drops the own-shares hash at the next commit', async () => {
    const client = server.client();
    const store = new RedisStore(client, { prefix: `{t${++prefixCounter}}`, config });
    const old = sample({ sampleId: 'E-1', sampledAt: '2025-01-01T00:00:00Z', oilHours: 100, lab: 'North lab', group: GROUP, readings: { Fe: 12, Cu: 3 } });
    expect((await store.store(old, GROUP, 1000)).status).toBe('new');
    // What the earlier layout wrote: `receivedAt|JSON array`, no common group and lab, and a hash of own shares.
    const keys = componentKeys(store.partitions.tag(store.partitions.of(old)), old);
    await client.del(keys.revisions);
    await client.hset(keys.revisions, 'E-1\u001f0', `1000|${encodeSample(old)}`);
    await client.hset(keys.own, '2025-01|p|Fe|0|n', '1');
    expect(await store.revisions(old)).toEqual([{ sample: old, receivedAt: 1000 }]);
    expect((await store.store(sample({ sampleId: 'E-1', sampledAt: '2025-01-01T00:00:00Z', oilHours: 100, lab: 'North lab', group: GROUP, readings: { Cu: 3, Fe: 12 } }), GROUP, 2000)).status).toBe('duplicate');
    const other = sample({ sampleId: 'E-1', sampledAt: '2025-01-01T00:00:00Z', oilHours: 100, lab: 'North lab', group: GROUP, readings: { Fe: 99 } });
    expect((await store.store(other, GROUP, 3000)).status).toBe('conflict');
    const conflicts = await revisionConflicts(client, store.partitions, [
      { index: 0, event: {}, sample: old },
      { index: 1, event: {}, sample: other },
    ]);
    expect([...conflicts.keys()]).toEqual([1]);

    // New revisions beside the old one: the common group and lab come from the first one stored in the new form.
    const next = sample({ sampleId: 'E-2', sampledAt: '2025-01-02T00:00:00Z', oilHours: 200, lab: 'North lab', group: GROUP, readings: { Fe: 13 } });
    const moved = sample({ sampleId: 'E-3', sampledAt: '2025-01-03T00:00:00Z', unitHours: 12.5, oilChanged: true, topUpLitres: 1.5, group: 'other-group', readings: { Fe: '<1', iso4406: '18/16/13' } });
    expect((await store.store(next, GROUP, 4000)).status).toBe('new');
    expect((await store.store(moved, GROUP, 5000)).status).toBe('new');
    expect(await client.hget(keys.revisions, COMMON_FIELD)).toBe(`${GROUP},North lab`);
    const all = (await store.revisions(old)).sort((a, b) => a.receivedAt - b.receivedAt);
    expect(all).toEqual([
      { sample: old, receivedAt: 1000 },
      { sample: next, receivedAt: 4000 },
      { sample: moved, receivedAt: 5000 },
    ]);
    expect((await store.store(moved, GROUP, 6000)).status).toBe('duplicate');
    expect([...(await revisionConflicts(client, store.partitions, [{ index: 0, event: {}, sample: next }, { index: 1, event: {}, sample: { ...moved, lab: 'South lab' } }])).keys()]).toEqual([1]);

    // Checkpoints and the incident state written plain still read.
    const plain = commitOf([old], 1);
    await client.hset(keys.evaluation, 'latest', JSON.stringify(plain.latest), 'incidents', JSON.stringify(plain.incidents));
    const input = (await store.evaluationInput(old))!;
    expect(input.latest).toEqual(plain.latest);
    expect(input.incidents).toEqual(plain.incidents);

    // And so do the deflated text form (`z2:`, base64) of a checkpoint, the incident state, a sparse checkpoint and a
    // findings-log step, through every reader, the lock script's among them.
    const step: StepRecord = {
      sampleId: old.sampleId,
      sampledAt: old.sampledAt,
      findings: [{ unit: old.unit, component: old.component, group: GROUP, sampleId: old.sampleId, sampledAt: old.sampledAt, measurand: 'Fe', rule: 'limit', disposition: 'incident', severity: 'caution', value: 12, threshold: 10, basis: 'reading', explanation: 'Fe 12 ppm is above the caution level of 10 ppm set for the group; re-sample to confirm and ask the lab to review the trend.' }],
    };
    const sparse = { ...plain.latest, count: 50 };
    await client.hset(keys.evaluation, 'latest', z2Form(JSON.stringify(plain.latest)), 'incidents', z2Form(JSON.stringify(plain.incidents)), `cp|${'50'.padStart(10, '0')}|${positionText(plain.latest.position!)}`, z2Form(JSON.stringify(sparse)));
    await client.hset(keys.steps, `${String(Date.parse(old.sampledAt)).padStart(15, '0')}|${old.sampleId}`, z2Form(JSON.stringify(step)));
    expect((await client.hget(keys.evaluation, 'latest'))!.startsWith('z2:')).toBe(true);
    expect((await store.evaluationInput(old))!.latest).toEqual(plain.latest);
    expect((await store.checkpointAtMost(old, 60))!).toEqual(sparse);
    expect(await store.findings(old)).toEqual([step]);
    const held = (await store.acquireWithInput(old, 10_000))!;
    expect(held.input!.latest).toEqual(plain.latest);
    expect(held.input!.incidents).toEqual(plain.incidents);
    await store.release(held.lease);

    const lease = (await store.acquire(old, 10_000))!;
    expect((await store.commit(old, lease, commitOf([old, next, moved], input.mark))).ok).toBe(true);
    expect(await client.exists(keys.own)).toBe(0);
    expect((await store.evaluationInput(old))!.latest).toEqual(commitOf([old, next, moved], input.mark).latest);
    // Written now: the deflated bytes themselves (`z3:`), where the text was long enough to deflate.
    const written = (await client.hgetBuffer(keys.evaluation, 'latest'))!;
    expect(written.subarray(0, 3).toString('latin1')).toBe('z3:');
  });
});
