/**
 * The live event of an incident's closing (src/pipeline/liveEvent.ts): it says how the incident was closed, and one
 * whose evidence was set aside — withdrawn by a late or corrected result, or answered by a responder's verdict on the
 * sample in doubt — carries severity `none` with the severity last announced beside it, as the e-mail's
 * X-Wearshift-Severity and the acknowledgement page say; every other event keeps its severity. Each is what the
 * published schema of the stream (LiveIncidentEvent) describes, and the board reads it out in those words.
 */
import { beforeAll, describe, expect, it } from 'vitest';
import { LiveIncidentEventSchema } from '../../src/contracts/eventSchemas.ts';
import { ADVISORY_CAUTION } from '../../src/domain/caution.ts';
import type { TimelineEntry } from '../../src/incidents/model.ts';
import type { IncidentChange } from '../../src/pipeline/incidentChanges.ts';
import { incidentEvent, NO_SEVERITY } from '../../src/pipeline/liveEvent.ts';

const AT = '2026-05-04T09:00:00.000Z';

function change(entry: TimelineEntry, state = 'closed', severity = 'alarm'): IncidentChange {
  return { incidentId: 'D-16/engine@D-16-2', unit: 'D-16', component: 'engine', state, severity, entry };
}

/** As the stream sends it: the caution added beside the severity (src/http/eventRoutes.ts). */
const streamed = (e: object) => ({ ...e, advisory: ADVISORY_CAUTION });

let board: { liveIncidentText(event: object, state: string): string };

beforeAll(async () => {
  // The board's session module reads the tab's sessionStorage when loaded; an empty one stands in for it.
  (globalThis as { sessionStorage?: unknown }).sessionStorage ??= { getItem: () => null, setItem: () => undefined, removeItem: () => undefined };
  // @ts-expect-error a plain JavaScript module of the board, without type declarations
  board = (await import('../../src/board/incidentText.js')) as typeof board;
});

describe('the live event of a closing', () => {
  it('withdrawn: severity none, the severity last announced, and how it closed', () => {
    const e = incidentEvent(change({ kind: 'closed', at: AT, how: 'withdrawn' }));
    expect(e).toEqual({ type: 'incident', incidentId: 'D-16/engine@D-16-2', unit: 'D-16', component: 'engine', severity: NO_SEVERITY, lastAnnouncedSeverity: 'alarm', state: 'closed', change: 'closed', at: AT, closed: { how: 'withdrawn' } });
    expect(NO_SEVERITY).toBe('none');
    expect(LiveIncidentEventSchema.safeParse(streamed(e)).success).toBe(true);
  });

  it('answered by a verdict on the sample in doubt: severity none, with who judged which sample and the word', () => {
    const e = incidentEvent(change({ kind: 'closed', at: AT, how: 'sample-verdict', by: 'Ben Sampler', sampleId: 'D-16-2', verdict: 'rejected' }, 'closed', 'caution'));
    expect(e).toMatchObject({ severity: 'none', lastAnnouncedSeverity: 'caution', closed: { how: 'sample-verdict', by: 'Ben Sampler', sampleId: 'D-16-2', verdict: 'rejected' } });
    expect(LiveIncidentEventSchema.safeParse(streamed(e)).success).toBe(true);
  });

  it('any other closing keeps its severity and says how it closed; other changes carry no closing', () => {
    const resolved = incidentEvent(change({ kind: 'closed', at: AT, how: 'resolved', by: 'R. Okafor', note: 'flushed' }));
    expect(resolved).toMatchObject({ severity: 'alarm', closed: { how: 'resolved', by: 'R. Okafor' } });
    expect(resolved).not.toHaveProperty('lastAnnouncedSeverity');
    // The note stays on the incident's page: the stream says how, not what was written.
    expect(resolved.type === 'incident' && resolved.closed).not.toHaveProperty('note');
    const opened = incidentEvent(change({ kind: 'opened', at: AT, sampleId: 'D-16-2', severity: 'alarm' }, 'active, unacknowledged'));
    expect(opened).toEqual({ type: 'incident', incidentId: 'D-16/engine@D-16-2', unit: 'D-16', component: 'engine', severity: 'alarm', state: 'active, unacknowledged', change: 'opened', at: AT });
    for (const e of [resolved, opened]) expect(LiveIncidentEventSchema.safeParse(streamed(e)).success).toBe(true);
  });

  it('the schema takes only the severities and ways of closing it names', () => {
    const e = incidentEvent(change({ kind: 'closed', at: AT, how: 'withdrawn' }));
    expect(LiveIncidentEventSchema.safeParse(streamed({ ...e, severity: 'nothing' })).success).toBe(false);
    expect(LiveIncidentEventSchema.safeParse(streamed({ ...e, lastAnnouncedSeverity: 'none' })).success).toBe(false);
    expect(LiveIncidentEventSchema.safeParse(streamed({ ...e, closed: { how: 'vanished' } })).success).toBe(false);
  });

  it('the board reads a set-aside closing out as closed with no severity standing, any other change with its severity', () => {
    const withdrawn = incidentEvent(change({ kind: 'closed', at: AT, how: 'withdrawn' }, 'closed', 'caution'));
    expect(board.liveIncidentText(withdrawn, 'closed')).toBe(
      'Incident closed: D-16 / engine, withdrawn: a late or corrected result changed the history so that this incident no longer stands; severity none: nothing of it stands (last announced as caution), closed.',
    );
    const opened = incidentEvent(change({ kind: 'opened', at: AT, sampleId: 'D-16-2', severity: 'alarm' }, 'active, unacknowledged'));
    expect(board.liveIncidentText(opened, 'active, unacknowledged')).toBe('Incident opened: D-16 / engine, alarm, active, unacknowledged.');
  });
});
