/**
 * An evaluation that judges a component up to a month's end (the worker does so when an earlier result of the same
 * component is still held elsewhere, or month by month in a backfill) leaves the later stored samples due. An incident
 * opened by one of those samples is not that evaluation's to judge: it stays on record as it stands, and the run that
 * folds the sample again finds what was told of it. Before this was so, the short run withdrew the incident (a closing
 * message to everyone told) and the next run opened it again as new, under the message keys of its first opening, which
 * the delivery ledger had already spent: the second announcement was never sent.
 *
 * In-memory pipeline, the real limit rule (site limit Fe caution 50 ppm of the invented engine fixture).
 */
import { describe, expect, it } from 'vitest';
import type { ResultEvent } from '../../src/domain/event.ts';
import type { NotifyEffect } from '../../src/incidents/model.ts';
import { incidentRules } from '../../src/incidents/policy.ts';
import { ComponentRun } from '../../src/pipeline/componentRun.ts';
import type { EvaluationDeps } from '../../src/pipeline/evaluateStored.ts';
import { MemoryStore } from '../../src/pipeline/memory/memoryStore.ts';
import { settleComponent } from '../../src/pipeline/settleComponent.ts';
import { storeResult } from '../../src/pipeline/storeResult.ts';
import { CONFIG, NOW, REF } from '../helpers/engineIronLimit.ts';

const at = (sampleId: string, sampledAt: string, fe: number): ResultEvent => ({ ...REF, sampleId, revision: 0, sampledAt, readings: { Fe: fe } });

async function scenario() {
  const store = new MemoryStore({ config: CONFIG, now: () => NOW });
  const deps: EvaluationDeps = { store, ledger: store, config: CONFIG, rules: incidentRules(CONFIG), now: () => NOW, checkpointEvery: 5 };
  const notify = () => store.outbox().filter((e): e is NotifyEffect => e.kind === 'notify');
  for (const r of [at('D-16-A', '2026-04-20T08:00:00Z', 12), at('D-16-C', '2026-05-02T08:00:00Z', 60)]) {
    const stored = await storeResult(store, CONFIG, r, NOW);
    if (stored.outcome.evaluationDue) await settleComponent(deps, stored.sample);
  }
  const opened = notify();
  // A late result of April; the run judges April only (May is left due), then a run takes the rest.
  await storeResult(store, CONFIG, at('D-16-B', '2026-04-25T08:00:00Z', 14), NOW);
  const run = await ComponentRun.open(deps, REF);
  if (!(run instanceof ComponentRun)) throw new Error(`the run did not open: ${run.kind}`);
  await run.foldStored(Date.parse('2026-05-01T00:00:00Z'));
  const short = await run.commit();
  const afterShort = { effects: notify().slice(opened.length), incident: store.incidents().find((i) => i.id === opened[0]?.incidentId) };
  await settleComponent(deps, REF);
  return { store, opened, short, afterShort, all: notify() };
}

describe('an incident opened by a sample an evaluation left due', () => {
  it('was opened and announced by the May result, Fe 60 above the caution level 50', async () => {
    const { opened } = await scenario();
    expect(opened.map((e) => [e.type, e.eventSeq, e.target])).toEqual([['wearshift.incident.opened', 1, 'ops']]);
  });

  it('stays open and untold while a run judges April only', async () => {
    const { short, afterShort, opened } = await scenario();
    expect(short.kind).toBe('evaluated');
    expect(afterShort.effects).toEqual([]);
    expect(afterShort.incident?.closed).toBeNull();
    expect(afterShort.incident?.eventSeq).toBe(opened[0]!.eventSeq);
  });

  it('keeps what was told of it when the May result is judged again: no message key twice, nothing announced anew', async () => {
    const { store, all, opened } = await scenario();
    const keys = all.map((e) => e.key);
    expect(new Set(keys).size).toBe(keys.length);
    expect(all.filter((e) => e.type === 'wearshift.incident.opened')).toHaveLength(1);
    const incident = store.incidents().find((i) => i.id === opened[0]!.incidentId)!;
    expect(incident.closed).toBeNull();
    expect(incident.alarm).toBe('active');
    expect(incident.timeline.filter((e) => e.kind === 'closed')).toEqual([]);
  });

  it('ends as a replay of the three results in order ends', async () => {
    const { store } = await scenario();
    const again = new MemoryStore({ config: CONFIG, now: () => NOW });
    const deps: EvaluationDeps = { store: again, ledger: again, config: CONFIG, rules: incidentRules(CONFIG), now: () => NOW, checkpointEvery: 5 };
    for (const r of [at('D-16-A', '2026-04-20T08:00:00Z', 12), at('D-16-B', '2026-04-25T08:00:00Z', 14), at('D-16-C', '2026-05-02T08:00:00Z', 60)]) {
      const stored = await storeResult(again, CONFIG, r, NOW);
      if (stored.outcome.evaluationDue) await settleComponent(deps, stored.sample);
    }
    const verdict = (s: MemoryStore) => s.incidents().map((i) => ({ id: i.id, closed: i.closed, alarm: i.alarm, severity: i.severity }));
    expect(verdict(store)).toEqual(verdict(again));
  });
});
