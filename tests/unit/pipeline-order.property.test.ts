/**
 * The verdict depends on the set of results only: any arrival order, with any mix of revisions, evaluated one
 * result at a time from the checkpoints (late results rewinding, the group's cascade re-judging other units)
 * reaches exactly the findings and incidents of a full rebuild (every result stored first, each component
 * evaluated once from the start and the group settled).
 */
import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { parseConfig } from '../../src/domain/configFile.ts';
import type { ResultEvent } from '../../src/domain/event.ts';
import { incidentRules } from '../../src/incidents/policy.ts';
import type { EvaluationDeps } from '../../src/pipeline/evaluateStored.ts';
import { MemoryStore } from '../../src/pipeline/memory/memoryStore.ts';
import { settleComponent } from '../../src/pipeline/settleComponent.ts';
import { storeResult } from '../../src/pipeline/storeResult.ts';
import { componentView } from '../../src/pipeline/componentView.ts';
import type { ComponentRef } from '../../src/pipeline/ports.ts';
import type { EvaluationRunnerDeps } from '../../src/queue/evaluationRunner.ts';
import { ResultBatches } from '../../src/queue/resultBatches.ts';
import { Partitions } from '../../src/redis/keys.ts';
import { silentLogger } from '../../src/telemetry/logger.ts';
import { inventedFleet } from '../helpers/fleetCsv.ts';
import { verdict } from '../helpers/incidentVerdict.ts';

const CONFIG = parseConfig(`
detection:
  measurands: [Fe, Cu]
  runningInHours: 0
  baselineIntervals: 4
population: { minResults: 6, bandHours: [0, 500], peers: { minComponents: 3 } }
groups:
  - name: lift-gearboxes
    match: { component: gearbox, unit: "^LS" }
    sumpLitres: 40
    limits: { Fe: { caution: 45, alarm: 70 }, Si: { caution: 15, alarm: 25 } }
`);
const NOW = Date.parse('2026-06-01T00:00:00Z');

async function run(records: readonly ResultEvent[], mode: 'one-by-one' | 'rebuild' | { readonly bursts: readonly number[] }) {
  const store = new MemoryStore({ config: CONFIG, now: () => NOW });
  const deps: EvaluationDeps = { store, ledger: store, config: CONFIG, rules: incidentRules(CONFIG), now: () => NOW, checkpointEvery: 5 };
  if (typeof mode === 'object') await inBatches(deps, store, records, mode.bursts);
  else {
    for (const r of records) {
      const stored = await storeResult(store, CONFIG, r, NOW);
      if (mode === 'one-by-one' && stored.outcome.evaluationDue) await settleComponent(deps, stored.sample);
    }
  }
  if (mode === 'rebuild') for (const c of await store.components()) await settleComponent(deps, c);
  const components = await store.components();
  const findings = Object.fromEntries(await Promise.all(components.map(async (c) => [`${c.unit}/${c.component}`, await store.findings(c)] as const)));
  const incidents = store
    .incidents()
    .filter((i) => i.closed?.how !== 'withdrawn')
    .map(verdict);
  return { store, findings, incidents };
}

/**
 * The live worker's way: results stored in bursts of the given sizes, each handed to the result batches as it is
 * stored, the next burst stored while the batches judge (a turn of the event loop between bursts); then the
 * evaluations the batches scheduled (the group's cascade, components found busy) run as the evaluate queue would run
 * them. Nothing else is evaluated: a result the batches left due would show as a difference.
 */
async function inBatches(deps: EvaluationDeps, store: MemoryStore, records: readonly ResultEvent[], bursts: readonly number[]): Promise<void> {
  const scheduled: ComponentRef[] = [];
  const queue = {
    add: async (_name: string, data: ComponentRef) => void scheduled.push(data),
    addBulk: async (jobs: { data: ComponentRef }[]) => void scheduled.push(...jobs.map((j) => j.data)),
  };
  const runner: EvaluationRunnerDeps = { ...deps, partitions: new Partitions('{p}', 1), evaluateQueues: [queue as never], logger: silentLogger() };
  const batches = new ResultBatches(runner);
  const judged: Promise<void>[] = [];
  let next = 0;
  for (let b = 0; next < records.length; b++) {
    const size = bursts[b % bursts.length]!;
    for (const r of records.slice(next, next + size)) {
      const stored = await storeResult(store, CONFIG, r, NOW);
      if (stored.outcome.evaluationDue) judged.push(batches.judge(stored.sample));
    }
    next += size;
    await new Promise((resolve) => setImmediate(resolve));
  }
  await Promise.all(judged);
  while (scheduled.length > 0) await settleComponent(deps, scheduled.shift()!);
}

/** An invented fleet of five gearboxes (one with a tripled iron wear rate), with revisions of a few samples. */
function fleetWithRevisions(): ResultEvent[] {
  const base = inventedFleet({ units: 5, samplesPerUnit: 18, seed: 7 });
  const revised = base.filter((_, i) => i % 11 === 3).map((e) => ({ ...e, revision: 1, readings: { ...e.readings, Fe: Number(e.readings.Fe) + 6 } }));
  return [...base, ...revised];
}

describe('arrival order', () => {
  const records = fleetWithRevisions();

  it('a full rebuild finds something to compare with', async () => {
    const { incidents, findings } = await run(records, 'rebuild');
    expect(incidents.length).toBeGreaterThan(0);
    expect(Object.values(findings).flat().length).toBeGreaterThan(0);
  });

  it('any order, one result at a time, gives the findings and incidents of a full rebuild', async () => {
    const reference = await run(records, 'rebuild');
    await fc.assert(
      fc.asyncProperty(fc.shuffledSubarray(records, { minLength: records.length, maxLength: records.length }), async (shuffled) => {
        const got = await run(shuffled, 'one-by-one');
        expect(got.findings).toEqual(reference.findings);
        expect(got.incidents).toEqual(reference.incidents);
      }),
      { numRuns: 12 },
    );
    // Twelve full replays, CPU-bound: about 11 s on a quiet two-core machine, several times that on a busy one.
  }, 600_000);

  /** Every arrival of `orders` in random bursts, through the live batches, equals the full rebuild. */
  async function batchesMatchRebuild(orders: fc.Arbitrary<readonly ResultEvent[]>, largestBurst: number): Promise<void> {
    const reference = await run(records, 'rebuild');
    await fc.assert(
      fc.asyncProperty(orders, fc.array(fc.integer({ min: 1, max: largestBurst }), { minLength: 1, maxLength: 8 }), async (arrival, bursts) => {
        const got = await run(arrival, { bursts });
        expect(got.findings).toEqual(reference.findings);
        expect(got.incidents).toEqual(reference.incidents);
      }),
      { numRuns: 12 },
    );
  }

  it('any order, stored in bursts and judged by the live batches, gives the findings and incidents of a full rebuild', async () => {
    await batchesMatchRebuild(fc.shuffledSubarray(records, { minLength: records.length, maxLength: records.length }), 40);
  }, 600_000);

  it('in sampling-time order, in bursts judged by the live batches, gives the findings and incidents of a full rebuild', async () => {
    await batchesMatchRebuild(fc.constant([...records].sort((a, b) => Date.parse(a.sampledAt) - Date.parse(b.sampledAt))), 60);
  }, 600_000);

  it('the component view (one fold from the start) shows the steps the checkpoints reached', async () => {
    const { store, findings } = await run([...records].reverse(), 'one-by-one');
    for (const c of await store.components()) {
      const view = (await componentView(store, store, CONFIG, c))!;
      const withFindings = view.evaluation.steps.filter((s) => s.findings.length > 0).map((s) => ({ sampleId: s.sampleId, sampledAt: s.sampledAt, findings: s.findings, ...(s.status && { status: s.status }) }));
      expect(withFindings).toEqual(findings[`${c.unit}/${c.component}`]);
    }
  }, 300_000);
});
