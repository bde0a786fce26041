/**
 * Live results taken in batches (src/queue/resultBatches.ts) on a private redis-server: the results that arrive while
 * a batch is being judged are judged together in the next one, each component by one run across the batch's months,
 * and the findings, group statistics and incidents are those of judging every result on its own as it arrives. Two
 * batch lines on one store stand for two worker processes: they judge in arrival order, each waiting for the earlier
 * results the other holds.
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { Config } from '../../src/domain/config.ts';
import { parseConfig } from '../../src/domain/configFile.ts';
import { componentKey, type Sample } from '../../src/domain/event.ts';
import { incidentRules } from '../../src/incidents/policy.ts';
import { validateResult } from '../../src/intake/validate.ts';
import { storeSample } from '../../src/pipeline/storeResult.ts';
import { groupOf } from '../../src/domain/settings.ts';
import { monthStart, resultAbout, type GroupOf } from '../../src/queue/arrivalOrder.ts';
import { runEvaluation, type EvaluationRunnerDeps } from '../../src/queue/evaluationRunner.ts';
import { openPartitionedQueues, resolveQueueSettings, QUEUE_NAMES } from '../../src/queue/queues.ts';
import { ResultBatches, type ResultBatchesOptions } from '../../src/queue/resultBatches.ts';
import { Partitions } from '../../src/redis/keys.ts';
import { RedisIncidents } from '../../src/redis/redisIncidents.ts';
import { RedisStore } from '../../src/redis/redisStore.ts';
import { silentLogger } from '../../src/telemetry/logger.ts';
import { createMetrics } from '../../src/telemetry/metrics.ts';
import { FLEET_CONFIG, inventedFleet } from '../helpers/fleetCsv.ts';
import { liftGearboxJudging, POPULATION_FLEET } from '../helpers/populationFleet.ts';
import { startRedisServer, type RedisServer } from '../helpers/redisServer.ts';
import { verdict } from '../helpers/incidentVerdict.ts';

// Every finding pages (nothing is quiet backfill) a webhook tier, so that the messages can be compared too; nothing is
// delivered here, the messages stay in the outbox.
const PAGING = `
escalation:
  policies:
    - name: gearbox-on-call
      tiers:
        - { afterMinutes: 0, webhooks: [control-room] }
channels:
  webhooks:
    - { name: control-room, url: "http://127.0.0.1:9/hook", secrets: [BATCHES_WEBHOOK_SECRET] }
`;
const fleetConfig = parseConfig(`${FLEET_CONFIG}
backfill: { quietAfterDays: 100000 }${PAGING}`);
// Population limits that open incidents, trusted at 12 results per band, in every group: what a group's statistics
// hold as of each month decides incidents (tests/helpers/populationFleet.ts).
const populationJudging = parseConfig(`${liftGearboxJudging(true)}${PAGING}`);
const NOW = Date.parse('2026-12-01T00:00:00Z');
let server: RedisServer;
let prefixes = 0;

beforeAll(async () => {
  server = await startRedisServer();
});
afterAll(async () => {
  await server?.dispose();
});

/** A batch line on its own prefix, or on `prefix` (another process on the same store), with `options`. */
function line(prefix = `{rb${++prefixes}}`, options: ResultBatchesOptions = {}, config = fleetConfig) {
  const connection = server.client();
  const store = new RedisStore(connection, { prefix, config });
  const partitions = new Partitions(prefix, 1);
  const evaluateQueues = openPartitionedQueues(QUEUE_NAMES.evaluate, connection, resolveQueueSettings({ prefix }), partitions);
  const metrics = createMetrics({ defaultMetrics: false });
  const deps: EvaluationRunnerDeps = { store, ledger: store, config, rules: incidentRules(config), now: () => NOW, partitions, evaluateQueues, logger: silentLogger(), metrics };
  const batches = new ResultBatches(deps, options);
  const incidents = new RedisIncidents(connection, { rules: incidentRules(config), prefix });
  return {
    prefix,
    batches,
    /** The /metrics text of the batches. */
    metricsText: () => metrics.registry.metrics(),
    async store(sample: Sample) {
      const stored = await storeSample(store, config, sample, NOW);
      expect(stored.outcome.status).toBe('new');
    },
    /**
     * Findings, group statistics and incident verdicts: what the way results were judged must not change. The other
     * units a late result's group shares marked (the group's cascade, which the evaluate queue's worker takes) are
     * judged first.
     */
    async state() {
      for (const c of await store.components()) expect(await runEvaluation(deps, c)).toBe('done');
      const components = await store.components();
      const perComponent = await Promise.all(
        components.map(async (c) => ({ entry: c, findings: await store.findings(c), group: await store.asOf(c.group, '9999-12', c), input: await store.evaluationInput(c) })),
      );
      const ids = (await incidents.list({ state: 'all', limit: 1000 })).map((i) => i.id).sort();
      const records = await Promise.all(ids.map(async (id) => verdict((await incidents.get(id))!)));
      return { perComponent: perComponent.map(({ input, ...rest }) => ({ ...rest, dirtyFrom: input?.dirtyFrom, folded: input?.latest?.count })), incidents: records };
    },
    /** The messages the evaluations put in the outbox, taken out: per incident, its event types in order. */
    async messages() {
      const out = new Map<string, string[]>();
      await incidents.drainOutbox(async (effects) => {
        for (const e of effects) if (e.kind === 'notify') (out.get(e.incidentId) ?? out.set(e.incidentId, []).get(e.incidentId)!).push(`${e.eventSeq} ${e.type.replace('wearshift.incident.', '')}`);
      });
      return new Map([...out].map(([id, events]) => [id, events.sort((a, b) => parseInt(a) - parseInt(b)).map((e) => e.split(' ')[1]!)]));
    },
    /** What the component's next evaluation would start from. */
    input: (ref: { unit: string; component: string }) => store.evaluationInput(ref),
    async close() {
      await Promise.all(evaluateQueues.map((q) => q.close()));
    },
  };
}

/** Resolves once `done` holds, looking every 10 ms (at most a minute). */
async function waitUntil(done: () => boolean): Promise<void> {
  for (let i = 0; i < 6000 && !done(); i++) await new Promise((r) => setTimeout(r, 10));
}

const validated = (events: readonly unknown[]) =>
  events.map((e) => {
    const parsed = validateResult(e, { now: NOW });
    if (!parsed.ok) throw new Error(JSON.stringify(parsed.issues));
    return parsed.sample;
  });
const samples = validated(inventedFleet({ units: 4, samplesPerUnit: 20 }));

/**
 * Two like-for-like groups: the fleet's lift gearboxes (the configuration's `lift-gearboxes`, units "LS…") and the same
 * results as the gearboxes of other units ("MX…", no rule matches them: the group is the component's name, `gearbox`).
 */
const twoGroups = validated(inventedFleet(POPULATION_FLEET).flatMap((e) => [e, { ...e, unit: e.unit.replace(/^LS/, 'MX'), sampleId: `MX-${e.sampleId}` }]));
const configuredGroupOf: GroupOf = (c) => groupOf(populationJudging, c);

/** The reference: every result judged on its own as it arrives. */
async function oneAtATime(of: readonly Sample[] = samples, config = fleetConfig) {
  const one = line(undefined, {}, config);
  for (const s of of) {
    await one.store(s);
    await one.batches.judge(s);
  }
  return one;
}

describe('live results judged in batches', () => {
  it('a backlog is judged in one batch after the first result, with the verdicts of one result at a time and its net messages', async () => {
    const one = await oneAtATime();
    const backlog = line();
    try {
      expect(one.batches.counts).toEqual({ batches: samples.length, components: samples.length, arrivalWaits: 0, takenOutsideSlots: 0 });

      // Every result stored, then handed over at once: the first is judged alone as it arrives, the other 79 wait for
      // it and are judged together, each of the 4 components by one run over the fleet's months.
      for (const s of samples) await backlog.store(s);
      await Promise.all(samples.map((s) => backlog.batches.judge(s)));
      expect(backlog.batches.counts).toEqual({ batches: 2, components: 1 + 4, arrivalWaits: 0, takenOutsideSlots: 0 });
      // The same on /metrics: 2 batches, of 1 and 79 results, 1 and 4 components.
      const text = await backlog.metricsText();
      expect(text).toMatch(/^wearshift_result_batch_results_count 2$/m);
      expect(text).toMatch(/^wearshift_result_batch_results_sum 80$/m);
      expect(text).toMatch(/^wearshift_result_batch_results_bucket\{le="1"\} 1$/m);
      expect(text).toMatch(/^wearshift_result_batch_components_sum 5$/m);

      // What each incident's people are told: one result at a time, every change as it comes (opened, returned,
      // active again...); a backlog judged in one batch, the difference its commit makes to what was told, so the
      // same incidents, each opened, and each left told in the condition it ends in, with no more messages.
      const condition = (type: string) => (type === 'returned' ? 'normal' : type === 'closed' ? 'closed' : 'active');
      const told = await one.messages();
      const batched = await backlog.messages();
      expect(told.size).toBeGreaterThan(0);
      expect([...batched.keys()].sort()).toEqual([...told.keys()].sort());
      for (const [id, events] of told) {
        const mine = batched.get(id)!;
        expect(mine[0]).toBe('opened');
        expect(condition(mine.at(-1)!)).toBe(condition(events.at(-1)!));
        expect(mine.length).toBeLessThanOrEqual(events.length);
      }
      const a = await one.state();
      const b = await backlog.state();
      expect(a.incidents.length).toBeGreaterThan(0);
      expect(a.perComponent.every((c) => c.dirtyFrom === undefined && c.folded === 20)).toBe(true);
      expect(b).toEqual(a);
    } finally {
      await one.close();
      await backlog.close();
    }
  });

  it('a late result judged alone folds again the results after it that were judged before, to the last one', async () => {
    const one = await oneAtATime();
    const held = samples.filter((s) => s.unit === samples[0]!.unit)[6]!;
    const late = await oneAtATime(samples.filter((x) => x !== held));
    try {
      // Its batch covers its own month only; nothing else waits: the run folds on to the component's last result.
      await late.store(held);
      await late.batches.judge(held);
      // Judged to its last result by this batch, not left due for an evaluation that nothing would ask for.
      const input = await late.input(held);
      expect(input?.dirtyFrom).toBeUndefined();
      expect(input?.latest?.count).toBe(20);
      expect(await late.state()).toEqual(await one.state());
    } finally {
      await one.close();
      await late.close();
    }
  });

  it('results stored while a batch is judged stay due from their position and are judged by the next batch', async () => {
    const one = await oneAtATime();
    const split = line();
    try {
      // The first half in a batch; the second half stored while it is under way (before its runs read their samples
      // or after), then handed over: whatever a run read but did not fold stays due and is folded by the next batch.
      const half = samples.length / 2;
      for (const s of samples.slice(0, half)) await split.store(s);
      const first = Promise.all(samples.slice(0, half).map((s) => split.batches.judge(s)));
      for (const s of samples.slice(half)) await split.store(s);
      await Promise.all([first, ...samples.slice(half).map((s) => split.batches.judge(s))]);
      expect(await split.state()).toEqual(await one.state());
    } finally {
      await one.close();
      await split.close();
    }
  });

  /**
   * A burst of `fleet` in the order of `arrival` (default: sampling order), taken ten at a time by each of two processes
   * in turn; every result is stored before either process judges any (the worst case: each process holds later months
   * the other has not judged). The processes tell results' groups with `groups` (arrivalOrder.ts `GroupOf`; default:
   * all in one).
   */
  async function inTurns(fleet: readonly Sample[], { groups, arrival = (s) => s.time, config = fleetConfig }: { groups?: GroupOf; arrival?: (s: Sample) => number; config?: Config } = {}) {
    const one = await oneAtATime(fleet, config);
    const ordered = [...fleet].sort((x, y) => arrival(x) - arrival(y));
    // The results jobs active in either process, by arrival order (the queue's job ids), as the queue would tell them.
    const active = new Set<number>();
    const about = (s: Sample) => ({ component: componentKey(s), group: (groups ?? (() => ''))(s), month: monthStart(s.time) });
    const options: ResultBatchesOptions = {
      activeJobs: async (skip) => [...active].filter((o) => !skip(o)).map((o) => ({ order: o, ...about(ordered[o - 1]!), queued: false, partition: 0 })),
      ...(groups !== undefined && { groupOf: groups }),
    };
    const a = line(undefined, options, config);
    const b = line(a.prefix, options, config);
    try {
      for (const [i, s] of ordered.entries()) {
        active.add(i + 1);
        await a.store(s);
      }
      const judged = ordered.map((s, i) => {
        const holder = Math.floor(i / 10) % 2 === 0 ? a : b;
        return holder.batches.judge(s, i + 1).then(() => active.delete(i + 1));
      });
      await Promise.all(judged);
      // A process waited for the earlier months the other held.
      expect(a.batches.counts.arrivalWaits + b.batches.counts.arrivalWaits).toBeGreaterThan(0);
      // The incidents of one result at a time, and none of them opened and withdrawn on the way.
      const told = await one.messages();
      const both = new Map([...(await a.messages())]);
      expect([...both.keys()].sort()).toEqual([...told.keys()].sort());
      for (const events of both.values()) expect(events[0]).toBe('opened');
      const state = await a.state();
      expect(state.incidents.length).toBeGreaterThan(0);
      expect(state.incidents.filter((i) => i.closed?.how === 'withdrawn')).toEqual([]);
      expect(state).toEqual(await one.state());
      return state;
    } finally {
      await one.close();
      await a.close();
      await b.close();
    }
  }

  it('two processes judge in arrival order: a batch waits for the earlier results the other holds, and nothing opened is withdrawn', async () => {
    await inTurns(samples);
  });

  it('two processes judge a fleet of two groups in arrival order, a result waiting only for its own group and component: the verdicts of one result at a time', async () => {
    // The "MX" gearboxes' results arrive three months behind the lift gearboxes' of the same time: a process holds one
    // group's earlier months while the other holds the other group's later ones.
    const state = await inTurns(twoGroups, { groups: configuredGroupOf, arrival: (s) => s.time + (s.unit.startsWith('MX') ? 90 * 86_400_000 : 0), config: populationJudging });
    // Both groups were judged, each with statistics of its own.
    expect(new Set(state.perComponent.map((c) => c.entry.group))).toEqual(new Set(['lift-gearboxes', 'gearbox']));
  });

  it("a group's verdicts do not depend on when another group's results are judged, while its own order matters", async () => {
    // What lets a result pass an earlier month of another group: every result judged on its own, one group's whole
    // history before the other's, gives the incidents and messages of the fleet judged in sampling order.
    const byTime = [...twoGroups].sort((x, y) => x.time - y.time);
    const reference = await oneAtATime(byTime, populationJudging);
    const groupwise = await oneAtATime([...byTime.filter((s) => s.unit.startsWith('MX')), ...byTime.filter((s) => s.unit.startsWith('LS'))], populationJudging);
    // The control: within one group, one unit's whole history before the next unit's is judged otherwise on the way.
    const unitwise = await oneAtATime([...byTime].sort((x, y) => (x.unit < y.unit ? -1 : x.unit > y.unit ? 1 : x.time - y.time)), populationJudging);
    try {
      const told = await reference.messages();
      expect(told.size).toBeGreaterThan(0);
      expect(await groupwise.messages()).toEqual(told);
      expect(await unitwise.messages()).not.toEqual(told);
      expect(await groupwise.state()).toEqual(await reference.state());
    } finally {
      await Promise.all([reference, groupwise, unitwise].map((l) => l.close()));
    }
  });

  it("a result is not held up by an earlier month of another group that another process holds, but is by its own group's", async () => {
    // Another process holds a lift gearbox's result of the fleet's first month (order 1). This process holds a result
    // of a later month of an "MX" gearbox (group gearbox, order 2) and one of another lift gearbox (order 3).
    const first = twoGroups[0]!;
    const later = twoGroups.filter((x) => monthStart(x.time) > monthStart(first.time));
    const other = later.find((x) => configuredGroupOf(x) !== configuredGroupOf(first))!;
    const same = later.find((x) => configuredGroupOf(x) === configuredGroupOf(first) && x.unit !== first.unit)!;
    const lines = [];
    for (const groups of [configuredGroupOf, undefined]) {
      let held = true;
      const waits = line(
        undefined,
        {
          activeJobs: async (skip) => (held && !skip(1) ? [{ order: 1, ...resultAbout(first, groups), queued: false, partition: 0 }] : []),
          ...(groups !== undefined && { groupOf: groups }),
          arrivalWaitMs: 600_000,
        },
        populationJudging,
      );
      lines.push(waits);
      await waits.store(other);
      await waits.store(same);
      const judged: string[] = [];
      const both = [waits.batches.judge(other, 2).then(() => judged.push('other')), waits.batches.judge(same, 3).then(() => judged.push('same'))];
      if (groups === undefined) {
        // All in one group: neither is judged while order 1 is held (however long: a wait of 600 s).
        await new Promise((resolve) => setTimeout(resolve, 200));
        expect(judged).toEqual([]);
      } else {
        // The other group's result is judged while order 1 is still held; its own group's waits.
        await both[0];
        expect(judged).toEqual(['other']);
      }
      held = false;
      await Promise.all(both);
      expect(judged.sort()).toEqual(['other', 'same']);
      expect(waits.batches.counts.arrivalWaits).toBe(1);
    }
    await Promise.all(lines.map((l) => l.close()));
  });

  it('an earlier result waiting to be taken, which no slot frees for, is taken outside the slots and judged first', async () => {
    // Two results of one component: the earlier (order 1) waits at the head of the queue, given back by a worker that
    // died, while this process holds the later one (order 2) in its only slot. Its batch takes order 1 itself
    // (takeQueued), once, and judges it with order 2, both folded; the queued job is then no longer listed.
    const [first, second] = samples.filter((s) => s.unit === samples[0]!.unit).slice(0, 2) as [Sample, Sample];
    let queued = true;
    let taken = 0;
    const judgedInOrder: number[] = [];
    const takes = line(undefined, {
      activeJobs: async (skip) => (queued && !skip(1) ? [{ order: 1, component: componentKey(first), group: '', month: monthStart(first.time), queued: true, partition: 0 }] : []),
      takeQueued: async () => {
        taken += 1;
        queued = false;
        const release = takes.batches.hold(1);
        try {
          await takes.store(first);
          await takes.batches.judge(first, 1);
          judgedInOrder.push(1);
        } finally {
          release();
        }
      },
      // Far longer than the test: only the take can end the wait.
      arrivalWaitMs: 600_000,
    });
    try {
      await takes.store(second);
      const release = takes.batches.hold(2);
      await takes.batches.judge(second, 2).then(() => judgedInOrder.push(2));
      release();
      await waitUntil(() => judgedInOrder.length === 2);
      expect(taken).toBe(1);
      // Judged together (one batch) or the earlier first: the wait of 600 s ended with the take.
      expect(judgedInOrder.sort()).toEqual([1, 2]);
      expect(takes.batches.counts.takenOutsideSlots).toBe(1);
      expect((await takes.input(second))?.latest?.count).toBe(2);
    } finally {
      await takes.close();
    }
  });

  it('a result this process still stores holds up the later results of an earlier-month batch, then both are judged together', async () => {
    // Two units' results: E (order 1, an earlier month) is taken by this process but still being stored when R (order 2,
    // a later month, another unit) is handed to the batches. R's batch waits for E (it may change the group's statistics
    // as of R's month) and both are judged in one batch once E is handed over.
    const [e, r] = [samples.find((x) => x.unit === samples[0]!.unit)!, samples.find((x) => x.unit !== samples[0]!.unit && monthStart(x.time) > monthStart(samples[0]!.time))!];
    const waits = line(undefined, { activeJobs: async () => [], arrivalWaitMs: 600_000 });
    try {
      const releaseE = waits.batches.hold(1, resultAbout(e));
      const releaseR = waits.batches.hold(2, resultAbout(r));
      await waits.store(r);
      let judgedR = false;
      const rJudged = waits.batches.judge(r, 2).then(() => (judgedR = true));
      // However long E takes to store, R stays unjudged (a wait of 600 s would end only with E).
      await new Promise((resolve) => setTimeout(resolve, 200));
      expect(judgedR).toBe(false);
      expect(waits.batches.counts.batches).toBe(0);
      await waits.store(e);
      await Promise.all([waits.batches.judge(e, 1), rJudged]);
      releaseE();
      releaseR();
      expect(waits.batches.counts).toMatchObject({ batches: 1, components: 2 });
      expect((await waits.input(e))?.latest?.count).toBe(1);
      expect((await waits.input(r))?.latest?.count).toBe(1);
    } finally {
      await waits.close();
    }
  });

  it('a batch judges without an earlier result another process holds once its wait is over', async () => {
    const waits = line(undefined, { activeJobs: async () => [{ order: 1, component: undefined, group: undefined, month: -Infinity, queued: false, partition: 0 }], arrivalWaitMs: 50 });
    try {
      const s = samples[0]!;
      await waits.store(s);
      // Order 1 stays active elsewhere for good (a process that hangs): the result of order 2 is judged after the wait.
      await waits.batches.judge(s, 2);
      expect(waits.batches.counts).toEqual({ batches: 1, components: 1, arrivalWaits: 1, takenOutsideSlots: 0 });
      expect((await waits.input(s))?.latest?.count).toBe(1);
    } finally {
      await waits.close();
    }
  });
});
