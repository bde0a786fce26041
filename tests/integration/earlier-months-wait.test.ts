/**
 * The wait for earlier months (src/queue/earlierMonths.ts) on a private redis-server, with two result batches standing
 * for two worker processes: one has stored January results of a unit and not yet judged them, the other is to judge a
 * February result of another unit of the group. The February judgement waits until January is judged, so that the
 * group's statistics as of February hold January (no cascade is needed to put it right). When January's jobs come back
 * to the waiting process itself (a worker that died), its batch ends uncommitted and is judged again with them, January
 * first. A wait bounded at zero judges at once and leaves the cascade to do it, as before; a wait that runs out gives up
 * on what it waited for.
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { parseConfig } from '../../src/domain/configFile.ts';
import type { Sample } from '../../src/domain/event.ts';
import { incidentRules } from '../../src/incidents/policy.ts';
import { validateResult } from '../../src/intake/validate.ts';
import { storeSample } from '../../src/pipeline/storeResult.ts';
import { EarlierMonths } from '../../src/queue/earlierMonths.ts';
import type { EvaluationRunnerDeps } from '../../src/queue/evaluationRunner.ts';
import { openPartitionedQueues, resolveQueueSettings, QUEUE_NAMES } from '../../src/queue/queues.ts';
import { ResultBatches } from '../../src/queue/resultBatches.ts';
import { Partitions } from '../../src/redis/keys.ts';
import { RedisStore } from '../../src/redis/redisStore.ts';
import { silentLogger } from '../../src/telemetry/logger.ts';
import { FLEET_CONFIG } from '../helpers/fleetCsv.ts';
import { startRedisServer, type RedisServer } from '../helpers/redisServer.ts';

const config = parseConfig(`${FLEET_CONFIG}
redis: { partitions: 4 }
backfill: { quietAfterDays: 100000 }
`);
const NOW = Date.parse('2026-12-01T00:00:00Z');
let server: RedisServer;
let prefixes = 0;

beforeAll(async () => {
  server = await startRedisServer();
});
afterAll(async () => {
  await server?.dispose();
});

function sample(unit: string, n: number, sampledAt: string): Sample {
  const parsed = validateResult(
    { sampleId: `${unit}-${n}`, unit, component: 'gearbox', sampledAt, unitHours: 250 * n, oilHours: 250 * n, readings: { Fe: 5 + 4 * n, Cu: 2 + n, Si: 4 } },
    { now: NOW },
  );
  if (!parsed.ok) throw new Error(JSON.stringify(parsed.issues));
  return parsed.sample;
}

/** Two "processes" on one Redis: each its own store connection, batches and wait; the evaluate queues shared. */
function line(maxWaitMs: number) {
  const prefix = `{ew${++prefixes}}`;
  const partitions = new Partitions(prefix, 4);
  const side = () => {
    const connection = server.client();
    const store = new RedisStore(connection, { prefix, partitions: 4, config });
    const evaluateQueues = openPartitionedQueues(QUEUE_NAMES.evaluate, connection, resolveQueueSettings({ prefix }), partitions);
    const deps: EvaluationRunnerDeps = { store, ledger: store, config, rules: incidentRules(config), now: () => NOW, partitions, evaluateQueues, logger: silentLogger() };
    const earlier = new EarlierMonths(store, { maxWaitMs, maxPauseMs: 20 });
    return { store, evaluateQueues, earlier, batches: new ResultBatches(deps, { earlier }) };
  };
  const a = side();
  const b = side();
  return {
    a,
    b,
    async store(s: Sample) {
      expect((await storeSample(a.store, config, s, NOW)).outcome.status).toBe('new');
    },
    /** Evaluations the group's cascade scheduled (the evaluate queues' jobs). */
    async cascaded(): Promise<number> {
      const counts = await Promise.all(a.evaluateQueues.map((q) => q.getJobCounts('waiting', 'delayed', 'prioritized')));
      return counts.reduce((n, c) => n + (c.waiting ?? 0) + (c.delayed ?? 0) + (c.prioritized ?? 0), 0);
    },
    async close() {
      await Promise.all([...a.evaluateQueues, ...b.evaluateQueues].map((q) => q.close()));
    },
  };
}

const january = [sample('LS1-Marsh Lane', 1, '2026-01-05T08:00:00Z'), sample('LS1-Marsh Lane', 2, '2026-01-26T08:00:00Z')];
const february = sample('LS2-Marsh Lane', 1, '2026-02-09T08:00:00Z');

describe('a month is judged once the earlier months of its group are', () => {
  it('waits while another process holds January results stored and unjudged, and needs no cascade after', async () => {
    const l = line(600_000);
    try {
      for (const s of january) await l.store(s);
      await l.store(february);
      // The other process (b) holds January; this one (a) is to judge February.
      let judged = false;
      const feb = l.a.batches.judge(february).then(() => (judged = true));
      // However long it is given, it does not go on while January is unjudged.
      await new Promise((r) => setTimeout(r, 500));
      expect(judged).toBe(false);
      expect((await l.a.store.unjudgedBefore('lift-gearboxes', Date.parse('2026-03-01T00:00:00Z'), 10)).map((u) => u.sampleId).sort()).toEqual([
        'LS1-Marsh Lane-1',
        'LS1-Marsh Lane-2',
        'LS2-Marsh Lane-1',
      ]);
      // January judged by the other process: February goes on, with statistics that hold January.
      await Promise.all(january.map((s) => l.b.batches.judge(s)));
      await feb;
      expect(l.a.earlier.counts).toEqual({ waits: 1, givenUp: 0 });
      expect(await l.a.store.unjudgedBefore('lift-gearboxes', Number.MAX_SAFE_INTEGER, 10)).toEqual([]);
      // No component was judged past a month whose statistics changed afterwards: nothing for the cascade.
      expect(await l.cascaded()).toBe(0);
    } finally {
      await l.close();
    }
  }, 120_000);

  it('a batch waiting for results of a worker that died takes them in when their jobs come back to it, and judges them first', async () => {
    const l = line(600_000);
    try {
      // January stored by a worker that died before judging it; nobody judges it until its jobs are taken again.
      for (const s of january) await l.store(s);
      await l.store(february);
      const feb = l.a.batches.judge(february);
      await new Promise((r) => setTimeout(r, 300));
      // The dead worker's jobs come back to this process: its waiting batch ends uncommitted and is judged again with
      // them, January first.
      const jan = Promise.all(january.map((s) => l.a.batches.judge(s)));
      await Promise.all([feb, jan]);
      expect(l.a.batches.counts.regroups).toBe(1);
      expect(await l.a.store.unjudgedBefore('lift-gearboxes', Number.MAX_SAFE_INTEGER, 10)).toEqual([]);
      expect(await l.cascaded()).toBe(0);
    } finally {
      await l.close();
    }
  }, 120_000);

  it('without a wait (0) judges February at once, and the cascade judges it again once January is', async () => {
    const l = line(0);
    try {
      for (const s of january) await l.store(s);
      await l.store(february);
      await l.a.batches.judge(february);
      expect(await l.cascaded()).toBe(0);
      await Promise.all(january.map((s) => l.b.batches.judge(s)));
      // January's shares changed statistics February was judged with: LS2 is to be judged again.
      expect(await l.cascaded()).toBe(1);
    } finally {
      await l.close();
    }
  }, 120_000);

  it('a wait that runs out gives up on what it waited for, and does not wait for it again', async () => {
    let clock = 0;
    const l = line(0);
    const earlier = new EarlierMonths(l.a.store, { maxWaitMs: 1_000, now: () => clock, sleep: async (ms) => void (clock += ms) });
    try {
      for (const s of january) await l.store(s);
      const feb = Date.parse('2026-02-01T00:00:00Z');
      await earlier.wait(['lift-gearboxes'], feb, () => false);
      expect(earlier.counts).toEqual({ waits: 0, givenUp: 2 });
      expect(clock).toBeGreaterThanOrEqual(1_000);
      const before = clock;
      await earlier.wait(['lift-gearboxes'], feb, () => false);
      expect(clock).toBe(before);
      // Its own components, and those held here for a next batch, are never waited for.
      const fresh = new EarlierMonths(l.a.store, { maxWaitMs: 1_000, now: () => clock, sleep: async (ms) => void (clock += ms) });
      await fresh.wait(['lift-gearboxes'], feb, (key) => key === 'LS1-Marsh Lane/gearbox');
      fresh.hold({ unit: 'LS1-Marsh Lane', component: 'gearbox' });
      await fresh.wait(['lift-gearboxes'], feb, () => false);
      expect(fresh.counts).toEqual({ waits: 0, givenUp: 0 });
      expect(clock).toBe(before);
    } finally {
      await l.close();
    }
  }, 120_000);
});
