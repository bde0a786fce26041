/**
 * A worker keeps the checkpoint and the incident state it committed decoded for its next evaluation of the same
 * component (RedisStore `heldStates`), named by a stamp its commit stores beside them. These tests check on a private
 * redis-server that this changes no verdict: the same findings and incidents as reading the state back every time
 * (and as the in-memory store's full rebuild), in any arrival order with revisions; that another writer (a second
 * worker's commit, a responder's action) makes the held copy stale, so that it is read again.
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { componentKey, type ResultEvent } from '../../src/domain/event.ts';
import type { Incident } from '../../src/incidents/model.ts';
import { incidentRules } from '../../src/incidents/policy.ts';
import type { EvaluationDeps } from '../../src/pipeline/evaluateStored.ts';
import { MemoryStore } from '../../src/pipeline/memory/memoryStore.ts';
import type { Checkpoint, ComponentRef, ComponentStore, GroupLedger } from '../../src/pipeline/ports.ts';
import { settleComponent } from '../../src/pipeline/settleComponent.ts';
import { storeResult } from '../../src/pipeline/storeResult.ts';
import { RedisIncidents } from '../../src/redis/redisIncidents.ts';
import { RedisStore } from '../../src/redis/redisStore.ts';
import { seededRandom } from '../../src/simulation/random.ts';
import { inventedFleet } from '../helpers/fleetCsv.ts';
import { fleetWithRevisions, ORDER_CONFIG, ORDER_NOW, verdictOf } from '../helpers/orderFleet.ts';
import { startRedisServer, type RedisServer } from '../helpers/redisServer.ts';

const CONFIG = ORDER_CONFIG;
const NOW = ORDER_NOW;
const RULES = incidentRules(CONFIG);

let server: RedisServer;
let prefixes = 0;

beforeAll(async () => {
  server = await startRedisServer();
});
afterAll(async () => {
  await server?.dispose();
});

type Store = ComponentStore & GroupLedger;

function shuffled<T>(items: readonly T[], seed: number): T[] {
  const rng = seededRandom(seed);
  const out = [...items];
  for (let i = out.length - 1; i > 0; i--) {
    const j = Math.floor(rng.next() * (i + 1));
    [out[i], out[j]] = [out[j]!, out[i]!];
  }
  return out;
}

/** The store, counting the evaluations that started from the checkpoint object its own last commit handed over. */
function counting(store: Store) {
  const committed = new Map<string, Checkpoint>();
  const counts = { evaluations: 0, fromHeld: 0 };
  const wrapped: Store = Object.create(store) as Store;
  Object.assign(wrapped, {
    acquireWithInput: async (ref: ComponentRef, ttl: number) => {
      const got = await store.acquireWithInput(ref, ttl);
      if (got?.input?.latest !== undefined) {
        counts.evaluations += 1;
        if (got.input.latest === committed.get(componentKey(ref))) counts.fromHeld += 1;
      }
      return got;
    },
    commit: async (ref: ComponentRef, lease: Parameters<Store['commit']>[1], commit: Parameters<Store['commit']>[2]) => {
      const outcome = await store.commit(ref, lease, commit);
      if (outcome.ok) committed.set(componentKey(ref), commit.latest);
      return outcome;
    },
  });
  return { store: wrapped, counts };
}

async function run(store: Store, records: readonly ResultEvent[], mode: 'one-by-one' | 'rebuild') {
  const deps: EvaluationDeps = { store, ledger: store, config: CONFIG, rules: RULES, now: () => NOW, checkpointEvery: 5 };
  for (const r of records) {
    const stored = await storeResult(store, CONFIG, r, NOW);
    if (mode === 'one-by-one' && stored.outcome.evaluationDue) await settleComponent(deps, stored.sample);
  }
  if (mode === 'rebuild') for (const c of await store.components()) await settleComponent(deps, c);
  const components = (await store.components()).sort((a, b) => (componentKey(a) < componentKey(b) ? -1 : 1));
  const findings = Object.fromEntries(await Promise.all(components.map(async (c) => [componentKey(c), await store.findings(c)] as const)));
  const incidents = (await Promise.all(components.map((c) => store.incidentsOpenedAfter(c, null))))
    .flat()
    .filter((i) => i.closed?.how !== 'withdrawn')
    .map(verdictOf)
    .sort((a, b) => (a.id < b.id ? -1 : 1));
  return { findings, incidents };
}

describe('a worker holding the state it committed', () => {
  const records = fleetWithRevisions();

  it('gives the findings and incidents of reading the state back each time, and of a full rebuild, in any arrival order', async () => {
    const memory = new MemoryStore({ config: CONFIG, now: () => NOW });
    const reference = await run(memory, records, 'rebuild');
    expect(reference.incidents.length).toBeGreaterThan(0);
    for (const seed of [1, 2, 3]) {
      const order = shuffled(records, seed);
      const held = counting(new RedisStore(server.client(), { prefix: `{held${++prefixes}}`, config: CONFIG }));
      const readBack = counting(new RedisStore(server.client(), { prefix: `{held${++prefixes}}`, config: CONFIG, heldStates: 0 }));
      const a = await run(held.store, order, 'one-by-one');
      const b = await run(readBack.store, order, 'one-by-one');
      expect(a).toEqual(b);
      expect(a.findings).toEqual(reference.findings);
      expect(a.incidents).toEqual(reference.incidents);
      // The held path was taken for most evaluations (late results rewind to a sparse checkpoint instead), and never
      // with heldStates 0.
      expect(held.counts.fromHeld).toBeGreaterThan(held.counts.evaluations / 2);
      expect(readBack.counts.fromHeld).toBe(0);
    }
  }, 120_000);

  it('reads the state again after another worker committed or a responder acted on an incident', async () => {
    const prefix = `{held${++prefixes}}`;
    const workerA = counting(new RedisStore(server.client(), { prefix, config: CONFIG }));
    const workerB = new RedisStore(server.client(), { prefix, config: CONFIG });
    const incidents = new RedisIncidents(server.client(), { prefix, rules: RULES });
    const faulty = inventedFleet({ units: 2, samplesPerUnit: 24, seed: 7 }).filter((e) => e.unit.startsWith('LS2'));
    const depsA: EvaluationDeps = { store: workerA.store, ledger: workerA.store, config: CONFIG, rules: RULES, now: () => NOW };
    const depsB: EvaluationDeps = { store: workerB, ledger: workerB, config: CONFIG, rules: RULES, now: () => NOW };
    for (const r of faulty.slice(0, -2)) await settleComponent(depsA, (await storeResult(workerA.store, CONFIG, r, NOW)).sample);
    const ref: ComponentRef = { unit: faulty[0]!.unit, component: 'gearbox' };
    const open = (await incidents.component(ref)).incidents;
    const [opened] = Object.values(open).filter((i) => i.closed === null);
    expect(opened, 'the tripled iron rate opened an incident').toBeDefined();
    expect(opened!.acknowledged).toBeNull();
    const named = (state: { incidents: Readonly<Record<string, Incident>> }) => Object.values(state.incidents).find((i) => i.id === opened!.id);

    // A responder acknowledges: the next evaluation in worker A starts from the acknowledged state, not its held copy.
    await incidents.applyAction({ kind: 'acknowledge', incidentId: opened!.id, by: 'control room', now: new Date(NOW) });
    const afterAction = (await workerA.store.acquireWithInput(ref, 30_000))!;
    expect(named(afterAction.input!.incidents)?.acknowledged ?? null).not.toBeNull();
    await workerA.store.release(afterAction.lease);

    // Worker B evaluates the next result; worker A then reads B's checkpoint (one sample further), not its own.
    const before = workerA.counts.fromHeld;
    await settleComponent(depsB, (await storeResult(workerB, CONFIG, faulty.at(-2)!, NOW)).sample);
    const afterB = (await workerA.store.acquireWithInput(ref, 30_000))!;
    expect(afterB.input!.latest!.count).toBe(faulty.length - 1);
    expect(workerA.counts.fromHeld).toBe(before);
    await workerA.store.release(afterB.lease);

    // And A's own commit is held again for its next evaluation.
    await settleComponent(depsA, (await storeResult(workerA.store, CONFIG, faulty.at(-1)!, NOW)).sample);
    const again = (await workerA.store.acquireWithInput(ref, 30_000))!;
    expect(workerA.counts.fromHeld).toBe(before + 1);
    expect(named(again.input!.incidents)?.acknowledged ?? null).not.toBeNull();
    await workerA.store.release(again.lease);
  }, 60_000);
});
