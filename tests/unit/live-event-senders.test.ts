/**
 * Every sender of live incident events applies the one rule of src/pipeline/liveEvent.ts: an event about an incident
 * closed because its evidence was set aside (withdrawn by a corrected result, or answered by a word on its sample) has
 * severity `none`, the severity last announced beside it and how it was closed — not only the closing's own event of
 * the worker, but every change after it: the closing message's `notified` entry (the worker), a queued message
 * withdrawn (the notify processor), a later word on its sample (sample verdicts), an operator's action (the API).
 * An incident closed otherwise keeps its severity and says how it was closed. Each event is what the published
 * schema of the stream (LiveIncidentEvent) describes.
 */
import type { Job, Queue } from 'bullmq';
import { describe, expect, it } from 'vitest';
import type { NotificationChannels } from '../../src/channels/openChannels.ts';
import { LiveIncidentEventSchema } from '../../src/contracts/eventSchemas.ts';
import { ADVISORY_CAUTION } from '../../src/domain/caution.ts';
import { announcingActions } from '../../src/http/eventHub.ts';
import type { IncidentRoutesStore } from '../../src/http/incidentRoutes.ts';
import type { Incident, NotifyEffect } from '../../src/incidents/model.ts';
import { incidentRules } from '../../src/incidents/policy.ts';
import { withdrawMessage } from '../../src/incidents/withdrawal.ts';
import type { EvaluationDeps } from '../../src/pipeline/evaluateStored.ts';
import type { IncidentChange } from '../../src/pipeline/incidentChanges.ts';
import { incidentEvent, type LiveEvent } from '../../src/pipeline/liveEvent.ts';
import { MemoryStore } from '../../src/pipeline/memory/memoryStore.ts';
import { settleComponent } from '../../src/pipeline/settleComponent.ts';
import { storeResult } from '../../src/pipeline/storeResult.ts';
import { notifyProcessor } from '../../src/queue/processors/notifyProcessor.ts';
import { SampleVerdicts } from '../../src/queue/sampleVerdicts.ts';
import { Partitions } from '../../src/redis/keys.ts';
import { silentLogger } from '../../src/telemetry/logger.ts';
import type { ResultEvent } from '../../src/domain/event.ts';
import { CONFIG, NOW, REF, result } from '../helpers/engineIronLimit.ts';

const INCIDENT = 'D-16/engine@D-16-2';

/** As the stream sends it: the caution added beside the severity (src/http/eventRoutes.ts). */
const streamed = (e: LiveEvent) => ({ ...e, advisory: ADVISORY_CAUTION });
const valid = (e: LiveEvent) => LiveIncidentEventSchema.safeParse(streamed(e)).success;

/** The standing of an incident closed because its evidence was set aside, as every event about it says it. */
const SET_ASIDE = { type: 'incident', incidentId: INCIDENT, unit: 'D-16', component: 'engine', severity: 'none', lastAnnouncedSeverity: 'caution', state: 'closed', closed: { how: 'withdrawn' } };

/**
 * The in-memory pipeline with the real limit rule: Fe 60 opens a caution incident and announces it (the `opened`
 * message), the lab's revision to Fe 20 withdraws it. Returns the incident changes of each evaluation.
 */
async function withdrawnByRevision() {
  const store = new MemoryStore({ config: CONFIG, now: () => NOW });
  const deps: EvaluationDeps = { store, ledger: store, config: CONFIG, rules: incidentRules(CONFIG), now: () => NOW, checkpointEvery: 5 };
  const post = async (r: ResultEvent) => {
    const changes: IncidentChange[] = [];
    const stored = await storeResult(store, CONFIG, r, NOW);
    if (stored.outcome.evaluationDue) await settleComponent(deps, stored.sample, (evaluated) => changes.push(...evaluated.changes));
    return changes;
  };
  await post(result('D-16-1', 1, 12));
  const opening = await post(result('D-16-2', 2, 60));
  const opened = store.outbox().find((e): e is NotifyEffect => e.kind === 'notify' && e.type === 'wearshift.incident.opened')!;
  const closing = await post(result('D-16-2', 2, 20, 1));
  const incident = store.incidents().find((i) => i.id === INCIDENT) as Incident;
  return { store, opening, opened, closing, incident };
}

describe('live events about an incident closed because its evidence was set aside', () => {
  it('the worker: the closing and the closing message it announces both carry severity none; the opening its severity', async () => {
    const { opening, closing, incident } = await withdrawnByRevision();
    expect(incident.closed?.how).toBe('withdrawn');
    const opened = opening.map(incidentEvent).find((e) => e.type === 'incident' && e.change === 'opened')!;
    expect(opened).toMatchObject({ severity: 'caution', state: 'active, unacknowledged' });
    expect(opened).not.toHaveProperty('closed');
    expect(opened).not.toHaveProperty('lastAnnouncedSeverity');

    // The change carries how the incident stands closed, so that the events after the closing can tell.
    expect(closing.map((c) => [c.entry.kind, c.closed?.how])).toEqual([
      ['closed', 'withdrawn'],
      ['notified', 'withdrawn'],
    ]);
    const events = closing.map(incidentEvent);
    expect(events.map((e) => e.type === 'incident' && e.change)).toEqual(['closed', 'notified']);
    for (const e of events) {
      expect(e).toMatchObject(SET_ASIDE);
      expect(valid(e)).toBe(true);
    }
  });

  it('the notify processor: the queued announcement withdrawn because the incident closed says severity none', async () => {
    const { store, opened, incident } = await withdrawnByRevision();
    const live: LiveEvent[] = [];
    const processor = notifyProcessor({
      store,
      ledger: store,
      config: CONFIG,
      // Never reached: the message is withdrawn before any channel is asked.
      channels: {} as NotificationChannels,
      apiBaseUrl: 'https://wearshift.plant.example',
      logger: silentLogger(),
      incidents: { withdrawMessage: async (effect, now) => withdrawMessage(incident, effect, now) },
      live: (e) => live.push(e),
      now: () => NOW,
    });
    const outcome = await processor({ name: opened.type, data: opened, attemptsMade: 0 } as unknown as Job<NotifyEffect>, undefined);
    expect(String(outcome)).toMatch(/^webhook ops: not sent, the incident was closed at /);
    expect(live).toHaveLength(1);
    expect(live[0]).toMatchObject({ ...SET_ASIDE, change: 'message withdrawn', at: new Date(NOW).toISOString() });
    expect(valid(live[0]!)).toBe(true);
  });

  it('sample verdicts: a word on a sample of the closed incident says severity none', async () => {
    const { incident } = await withdrawnByRevision();
    const live: LiveEvent[] = [];
    const at = new Date('2026-05-05T10:00:00Z');
    const verdicts = new SampleVerdicts(
      {
        markSample: async () => true,
        findings: async () => [{ sampleId: 'D-16-2', status: 'in-doubt', findings: [] }] as never,
        revisions: async () => [],
      },
      [{ add: async () => undefined } as unknown as Queue],
      new Partitions('{unit}', 1),
      {
        incidents: {
          recordSampleVerdict: async (_ref, word) => [{ ...incident, timeline: [...incident.timeline, { kind: 'sample-verdict', at: word.now.toISOString(), sampleId: word.sampleId, verdict: word.verdict, by: word.by }] }],
          component: async () => ({ judged: null }),
        },
        live: (e) => live.push(e),
        now: () => at,
      },
    );
    expect(await verdicts.mark(REF, 'D-16-2', 'confirmed', 'lab desk')).toBe('taken');
    expect(live).toEqual([{ ...SET_ASIDE, change: 'sample-verdict', at: at.toISOString() }]);
    expect(valid(live[0]!)).toBe(true);
  });

  it("an operator's action: a note on the closed incident says severity none", async () => {
    const { incident } = await withdrawnByRevision();
    const noteAt = '2026-05-05T11:00:00.000Z';
    const published: LiveEvent[] = [];
    const store = {
      applyAction: async () => ({ incident: { ...incident, timeline: [...incident.timeline, { kind: 'note', at: noteAt, by: 'R. Okafor', note: 'lab confirmed the correction' }] } }),
    } as unknown as IncidentRoutesStore;
    await announcingActions(store, (e) => published.push(e)).applyAction({ kind: 'note', incidentId: INCIDENT, by: 'R. Okafor', note: 'lab confirmed the correction', now: new Date(noteAt) });
    expect(published).toEqual([{ ...SET_ASIDE, change: 'note', at: noteAt }]);
    expect(valid(published[0]!)).toBe(true);
  });

  it('an incident closed otherwise keeps its severity on every event about it, and says how it was closed', async () => {
    const { incident } = await withdrawnByRevision();
    const resolved: Incident = { ...incident, closed: { at: '2026-05-05T12:00:00.000Z', how: 'resolved', by: 'R. Okafor', note: 'flushed' } };
    const published: LiveEvent[] = [];
    const store = { applyAction: async () => ({ incident: { ...resolved, timeline: [...resolved.timeline, { kind: 'note', at: '2026-05-05T13:00:00.000Z', by: 'R. Okafor', note: 'oil changed' }] } }) } as unknown as IncidentRoutesStore;
    await announcingActions(store, (e) => published.push(e)).applyAction({ kind: 'note', incidentId: INCIDENT, by: 'R. Okafor', note: 'oil changed', now: new Date('2026-05-05T13:00:00.000Z') });
    expect(published).toEqual([{ type: 'incident', incidentId: INCIDENT, unit: 'D-16', component: 'engine', severity: 'caution', state: 'closed', change: 'note', at: '2026-05-05T13:00:00.000Z', closed: { how: 'resolved', by: 'R. Okafor' } }]);
    expect(valid(published[0]!)).toBe(true);
  });
});
