/**
 * Evaluation threads (src/queue/evaluationThreadPool.ts) on a private redis-server: an evaluation on a thread, with the
 * thread's own connection and store, gives what the same evaluation gives on the calling thread; the threads'
 * connections are named and go at close.
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { parseConfig } from '../../src/domain/configFile.ts';
import { componentKey } from '../../src/domain/event.ts';
import { incidentRules } from '../../src/incidents/policy.ts';
import { validateBatch } from '../../src/intake/validate.ts';
import { evaluateStored } from '../../src/pipeline/evaluateStored.ts';
import { summarizeEvaluation, type EvaluationSummary } from '../../src/pipeline/evaluationSummary.ts';
import type { ComponentRef } from '../../src/pipeline/ports.ts';
import { storeSamples } from '../../src/pipeline/storeResult.ts';
import { EVALUATION_THREAD_CONNECTION, EvaluationThreadPool } from '../../src/queue/evaluationThreadPool.ts';
import { RedisStore } from '../../src/redis/redisStore.ts';
import { FLEET_CONFIG, inventedFleet } from '../helpers/fleetCsv.ts';
import { waitFor } from '../helpers/processes.ts';
import { startRedisServer, type RedisServer } from '../helpers/redisServer.ts';

const config = parseConfig(FLEET_CONFIG);
const NOW = Date.parse('2026-11-30T12:00:00Z');
let server: RedisServer;

beforeAll(async () => {
  server = await startRedisServer();
});
afterAll(async () => {
  await server?.dispose();
});

/** The fleet stored under `prefix`; its components. */
async function storedFleet(prefix: string): Promise<{ store: RedisStore; refs: ComponentRef[] }> {
  const store = new RedisStore(server.client(), { prefix, config });
  const samples = validateBatch(inventedFleet({ units: 4, samplesPerUnit: 16 }), { now: NOW }).accepted.map((a) => a.sample);
  await storeSamples(store, config, samples, NOW);
  const refs = new Map(samples.map((s) => [componentKey(s), { unit: s.unit, component: s.component }]));
  return { store, refs: [...refs.values()] };
}

/** Names of the clients connected to the server. */
async function clientNames(): Promise<string[]> {
  const list = (await server.client().client('LIST')) as string;
  return list
    .split('\n')
    .map((line) => /name=(\S*)/.exec(line)?.[1] ?? '')
    .filter((n) => n !== '');
}

describe('evaluation threads', () => {
  it('evaluate a component as the calling thread does, each thread on a connection of its own, closed at the end', async () => {
    const here = await storedFleet('{th-here}');
    const there = await storedFleet('{th-pool}');
    const pool = new EvaluationThreadPool({ threads: 2, target: { kind: 'single', url: server.url }, prefix: '{th-pool}', partitions: 1, config, lockTtlMs: 30_000, checkpointEvery: 50 });
    try {
      // One component after another, on both sides (evaluations at once would cascade in an order of their own).
      const threaded: EvaluationSummary[] = [];
      for (const ref of there.refs) threaded.push(await pool.evaluate(ref, NOW));
      const deps = { store: here.store, ledger: here.store, config, rules: incidentRules(config), now: () => NOW };
      const local: EvaluationSummary[] = [];
      for (const ref of here.refs) local.push(summarizeEvaluation(await evaluateStored(deps, ref)));
      const comparable = (s: EvaluationSummary) => (s.kind === 'evaluated' ? { ...s, durationMs: 0 } : s);
      expect(threaded.map((s) => s.kind)).toEqual(here.refs.map(() => 'evaluated'));
      expect(threaded.map(comparable)).toEqual(local.map(comparable));
      // What the threads committed is what the calling thread committed.
      for (let i = 0; i < here.refs.length; i++) expect(await there.store.findings(there.refs[i]!)).toEqual(await here.store.findings(here.refs[i]!));
      expect(threaded.flatMap((s) => (s.kind === 'evaluated' ? s.findings : [])).length).toBeGreaterThan(0);
      // Nothing left to do: evaluations of every component at once, on both threads, find them settled.
      expect((await Promise.all(there.refs.map((ref) => pool.evaluate(ref, NOW)))).map((s) => s.kind)).toEqual(there.refs.map(() => 'unchanged'));
      expect((await clientNames()).filter((n) => n === EVALUATION_THREAD_CONNECTION)).toHaveLength(2);
    } finally {
      await pool.close();
    }
    // The threads said QUIT before they ended; Redis drops such a client once its reply is written.
    await waitFor('the threads\' connections closed', async () => !(await clientNames()).includes(EVALUATION_THREAD_CONNECTION), 30_000);
    await expect(pool.evaluate(there.refs[0]!, NOW)).rejects.toThrow(/closed/);
  });

  it('end when idle and start again when needed', async () => {
    const there = await storedFleet('{th-idle}');
    const pool = new EvaluationThreadPool({ threads: 2, idleMs: 100, target: { kind: 'single', url: server.url }, prefix: '{th-idle}', partitions: 1, config, lockTtlMs: 30_000, checkpointEvery: 50 });
    try {
      expect(pool.running).toBe(0);
      expect((await Promise.all(there.refs.map((ref) => pool.evaluate(ref, NOW)))).every((s) => s.kind === 'evaluated' || s.kind === 'unchanged')).toBe(true);
      // Nothing more to do: both end (at least 100 ms later), and their connections with them.
      await waitFor('idle threads ended', () => pool.running === 0, 30_000, 20);
      await waitFor("the idle threads' connections closed", async () => !(await clientNames()).includes(EVALUATION_THREAD_CONNECTION), 30_000);
      // The next request starts one again.
      const again = await pool.evaluate(there.refs[0]!, NOW);
      expect(again.kind).toBe('unchanged');
      expect(pool.running).toBe(1);
    } finally {
      await pool.close();
    }
  });
});
