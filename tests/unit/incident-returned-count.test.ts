/**
 * The message of a return to normal says where the verdict returned the incident, not how many clean samples the
 * incident counts when it is told (pure engine): several results judged together (a batch, a backfill) fold more
 * clean samples than the return took before the annunciation runs.
 */
import { describe, expect, it } from 'vitest';
import { ConfigSchema } from '../../src/domain/config.ts';
import type { Finding } from '../../src/domain/finding.ts';
import { applySteps } from '../../src/incidents/applySteps.ts';
import { applySampleVerdict } from '../../src/incidents/sampleVerdict.ts';
import { emptyComponentIncidents, type NotifyEffect } from '../../src/incidents/model.ts';
import { incidentRules } from '../../src/incidents/policy.ts';

const UNIT = 'R';
const COMPONENT = 'gearbox';
const T0 = Date.parse('2026-03-01T08:00:00Z');
const DAY = 86_400_000;
const rules = (returnAfterSamples: number) =>
  incidentRules(
    ConfigSchema.parse({
      incidents: { returnAfterSamples },
      channels: { webhooks: [{ name: 'ops', url: 'https://ops.example/hooks', secrets: ['WEBHOOK_SECRET'] }] },
      escalation: { policies: [{ name: 'all', tiers: [{ afterMinutes: 0, webhooks: ['ops'] }] }] },
    }),
  );

function step(n: number, fe?: number) {
  const sampleId = `R-${n}`;
  const sampledAt = new Date(T0 + n * DAY).toISOString();
  const findings: Finding[] =
    fe === undefined
      ? []
      : [{ unit: UNIT, component: COMPONENT, group: 'gearboxes', measurand: 'Fe', rule: 'limit', disposition: 'incident', severity: 'caution', value: fe, threshold: 50, basis: 'reading', sampleId, sampledAt, explanation: `Fe ${fe} ppm is above the caution level 50 ppm.` } as Finding];
  return { sampleId, sampledAt, findings };
}

/** Live: judged an hour after the last of the steps was drawn. */
const ctx = (last: number, returnAfterSamples: number) => ({ group: 'gearboxes', now: new Date(T0 + last * DAY + 3_600_000), quietBefore: new Date(T0), rules: rules(returnAfterSamples) });

function returnedTogether(returnAfterSamples: number, clean: readonly number[]) {
  const open = applySteps(emptyComponentIncidents(UNIT, COMPONENT), [step(1), step(2, 60)], ctx(2, returnAfterSamples)).state;
  const last = clean.at(-1)!;
  const r = applySteps(open, clean.map((n) => step(n)), ctx(last, returnAfterSamples));
  const messages = r.effects.filter((e): e is NotifyEffect => e.kind === 'notify' && e.type === 'wearshift.incident.returned');
  return { incident: Object.values(r.state.incidents)[0]!, messages };
}

describe('the message of a return to normal, several results judged at once', () => {
  it('names the sample it returned at and the clean samples that returned it, not those judged after', () => {
    const { incident, messages } = returnedTogether(2, [3, 4, 5]);
    expect(incident.cleanSteps).toBe(3);
    expect(incident.timeline.filter((e) => e.kind === 'returned')).toEqual([{ kind: 'returned', at: step(4).sampledAt, sampleId: 'R-4', cleanSamples: 2 }]);
    expect(messages.map((m) => m.incident.reason)).toEqual(['returned to normal at sample R-4, after 2 samples without findings; still unacknowledged']);
  });

  it('follows the configured count', () => {
    const { messages } = returnedTogether(3, [3, 4, 5, 6, 7]);
    expect(messages.map((m) => m.incident.reason)).toEqual(['returned to normal at sample R-5, after 3 samples without findings; still unacknowledged']);
  });

  it('says so when a responder\u2019s word on a usual rate stands on the incident, and not once it is taken back', () => {
    const open = applySteps(emptyComponentIncidents(UNIT, COMPONENT), [step(1), step(2, 60)], ctx(2, 2)).state;
    const word = (verdict: 'usual-rate' | 'withdrawn', minute: number) => ({ sampleId: 'R-2', verdict, by: 'reliability engineer', now: new Date(T0 + 2 * DAY + minute * 60_000) });
    const reasons = (state: typeof open) =>
      applySteps(state, [step(3), step(4)], ctx(4, 2)).effects.filter((e): e is NotifyEffect => e.kind === 'notify' && e.type === 'wearshift.incident.returned').map((m) => m.incident.reason);
    const said = applySampleVerdict(open, [], word('usual-rate', 5), rules(2)).state;
    expect(reasons(said)).toEqual([
      "returned to normal at sample R-4, after 2 samples without findings, once reliability engineer had said that the rate signalled at sample R-2 is this component's usual one (its change detectors learn a new baseline from there); still unacknowledged",
    ]);
    const takenBack = applySampleVerdict(said, [], word('withdrawn', 10), rules(2)).state;
    expect(reasons(takenBack)).toEqual(['returned to normal at sample R-4, after 2 samples without findings; still unacknowledged']);
  });

  it('says "sample" for one', () => {
    const { messages } = returnedTogether(1, [3, 4]);
    expect(messages.map((m) => m.incident.reason)).toEqual(['returned to normal at sample R-3, after 1 sample without findings; still unacknowledged']);
  });
});
