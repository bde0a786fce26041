/**
 * The verdict depends on the set of results only: any arrival order, with any mix of revisions, evaluated one
 * result at a time from the checkpoints (late results rewinding, the group's cascade re-judging other units)
 * reaches exactly the findings and incidents of a full rebuild (every result stored first, each component
 * evaluated once from the start and the group settled).
 */
import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import type { ResultEvent } from '../../src/domain/event.ts';
import { incidentRules } from '../../src/incidents/policy.ts';
import type { EvaluationDeps } from '../../src/pipeline/evaluateStored.ts';
import { MemoryStore } from '../../src/pipeline/memory/memoryStore.ts';
import { settleComponent } from '../../src/pipeline/settleComponent.ts';
import { storeResult } from '../../src/pipeline/storeResult.ts';
import { componentView } from '../../src/pipeline/componentView.ts';
import { fleetWithRevisions, ORDER_CONFIG, ORDER_NOW, verdictOf } from '../helpers/orderFleet.ts';

const CONFIG = ORDER_CONFIG;
const NOW = ORDER_NOW;
const verdict = verdictOf;

async function run(records: readonly ResultEvent[], mode: 'one-by-one' | 'rebuild') {
  const store = new MemoryStore({ config: CONFIG, now: () => NOW });
  const deps: EvaluationDeps = { store, ledger: store, config: CONFIG, rules: incidentRules(CONFIG), now: () => NOW, checkpointEvery: 5 };
  for (const r of records) {
    const stored = await storeResult(store, CONFIG, r, NOW);
    if (mode === 'one-by-one' && stored.outcome.evaluationDue) await settleComponent(deps, stored.sample);
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

  it('the component view (one fold from the start) shows the steps the checkpoints reached', async () => {
    const { store, findings } = await run([...records].reverse(), 'one-by-one');
    for (const c of await store.components()) {
      const view = (await componentView(store, store, CONFIG, c))!;
      const withFindings = view.evaluation.steps.filter((s) => s.findings.length > 0).map((s) => ({ sampleId: s.sampleId, sampledAt: s.sampledAt, findings: s.findings, ...(s.status && { status: s.status }) }));
      expect(withFindings).toEqual(findings[`${c.unit}/${c.component}`]);
    }
  }, 300_000);
});
