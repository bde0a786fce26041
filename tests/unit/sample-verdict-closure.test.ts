/**
 * An incident a responder answered (pure engine): the word on the sample in doubt that opened it takes it out of the
 * history, and the fold closes it as `sample-verdict` — who said what of which sample, at the time the word was
 * given — not as withdrawn by a late result. Everyone told of it hears why in those words, and what it stood on that
 * no longer holds, with no finding sent as current; a fold of the same history with the same words closes it the same
 * way, whenever it runs.
 */
import { describe, expect, it } from 'vitest';
import { ConfigSchema } from '../../src/domain/config.ts';
import type { Finding } from '../../src/domain/finding.ts';
import { applySteps } from '../../src/incidents/applySteps.ts';
import { IncidentFold } from '../../src/incidents/incidentFold.ts';
import { closureText, emptyComponentIncidents, type ComponentIncidents, type NotifyEffect, type SampleVerdict } from '../../src/incidents/model.ts';
import { incidentRules } from '../../src/incidents/policy.ts';
import { applySampleVerdict, closingVerdict } from '../../src/incidents/sampleVerdict.ts';

const UNIT = 'QX-1';
const COMPONENT = 'gearbox';
const T0 = Date.parse('2026-03-01T08:00:00Z');
const DAY = 86_400_000;
const RULES = incidentRules(
  ConfigSchema.parse({
    channels: { webhooks: [{ name: 'samplers', url: 'https://samplers.example/hooks', secrets: ['WEBHOOK_SECRET'] }] },
    escalation: { policies: [{ name: 'samplers', match: { kinds: ['sampling'] }, tiers: [{ afterMinutes: 0, webhooks: ['samplers'] }] }] },
  }),
);
const SAMPLING_ID = `${UNIT}/${COMPONENT}/sampling@QX-1-026`;

function step(n: number, rule: 'limit' | 'sampling' | null) {
  const sampleId = `QX-1-0${n}`;
  const sampledAt = new Date(T0 + n * 10 * DAY).toISOString();
  const findings: Finding[] =
    rule === null
      ? []
      : [{ unit: UNIT, component: COMPONENT, group: 'gearboxes', measurand: 'Fe', rule, ...(rule === 'sampling' && { check: 'new-oil-mid-charge' }), disposition: 'incident', severity: 'caution', value: 1, threshold: 4, basis: 'reading', sampleId, sampledAt, explanation: `Fe ${rule}` } as Finding];
  return { sampleId, sampledAt, findings };
}

const ctx = (now: Date) => ({ group: 'gearboxes', now, quietBefore: new Date(0), rules: RULES });
const base = emptyComponentIncidents(UNIT, COMPONENT);
/** A bottle of new oil at QX-1-026 opens a sampling incident, announced to the samplers. */
const asked = applySteps(base, [step(25, null), step(26, 'sampling'), step(27, null)], ctx(new Date(T0 + 280 * DAY))).state;
const wordAt = new Date(T0 + 281 * DAY);

/** The word given, then the history folded again without the sample's sampling finding (what the mark does). */
function answer(state: ComponentIncidents, verdict: SampleVerdict, foldAt: Date, sampleId = 'QX-1-026') {
  const given = applySampleVerdict(state, [], { sampleId, verdict, by: 'Jo Sampler', now: wordAt }, RULES);
  const fold = new IncidentFold(base, given.state, ctx(foldAt));
  for (const s of [step(25, null), step(26, null), step(27, null)]) fold.step(s);
  return fold.finish();
}

describe("an incident a responder's word on its sample answered", () => {
  it('is announced before the word, to the samplers', () => {
    const inc = asked.incidents[`${UNIT}/${COMPONENT}/sampling`]!;
    expect(inc.id).toBe(SAMPLING_ID);
    expect(inc.announced).not.toBeNull();
    expect(inc.notifications.map((n) => n.targets)).toEqual([['webhook:samplers']]);
  });

  it('closes as sample-verdict when the sample is rejected: who, which sample, which word, when; and says so to those told', () => {
    const r = answer(asked, 'rejected', new Date(T0 + 282 * DAY));
    const [gone, ...more] = r.withdrawn;
    expect(more).toEqual([]);
    expect(gone!.id).toBe(SAMPLING_ID);
    const closure = { at: wordAt.toISOString(), how: 'sample-verdict', by: 'Jo Sampler', sampleId: 'QX-1-026', verdict: 'rejected' };
    expect(gone!.closed).toEqual(closure);
    expect(gone!.timeline.at(-1)).toEqual({ kind: 'closed', ...closure });
    const closing = r.effects.filter((e): e is NotifyEffect => e.kind === 'notify' && e.type === 'wearshift.incident.closed');
    expect(closing.map((e) => [e.incidentId, e.target])).toEqual([[SAMPLING_ID, 'samplers']]);
    expect(closing[0]!.incident.reason).toBe(
      'closed: sample QX-1-026 rejected by Jo Sampler (sample judged wrong; kept out of the trend); the sampling findings it was raised on were borne out: sample (new-oil bottle mid-charge, caution) of sample QX-1-026',
    );
    // The responder agreed with the sampling finding: it is not reported as no longer holding.
    expect(closing[0]!.incident.reason).not.toMatch(/withdrawn|late or corrected|no longer hold/);
    // Receivers read how it closed without parsing the sentence.
    expect(closing[0]!.incident.closure).toEqual(closure);
    // Its finding no longer holds: set aside, never sent as current evidence; its alarm is no longer active.
    expect(closing[0]!.incident.findings).toEqual([]);
    expect(closing[0]!.incident.alarm).toBe('returned');
    expect(gone!.evidence).toEqual([]);
    expect(gone!.withdrawnEvidence?.map((f) => [f.rule, f.sampleId])).toEqual([['sampling', 'QX-1-026']]);
  });

  it('closes as sample-verdict when the sample is confirmed as genuine', () => {
    const r = answer(asked, 'confirmed', new Date(T0 + 282 * DAY));
    expect(r.withdrawn[0]!.closed).toMatchObject({ how: 'sample-verdict', verdict: 'confirmed', by: 'Jo Sampler' });
    const closing = r.effects.find((e): e is NotifyEffect => e.kind === 'notify' && e.type === 'wearshift.incident.closed')!;
    expect(closing.incident.reason).toBe(
      'closed: sample QX-1-026 confirmed as genuine by Jo Sampler (back into the trend); the findings it stood on no longer hold: sample (new-oil bottle mid-charge, caution) of sample QX-1-026',
    );
    expect(closing.incident.findings).toEqual([]);
  });

  it('closes the same way whenever the fold runs (the closing time is the word’s, not the clock’s)', () => {
    const early = answer(asked, 'rejected', new Date(T0 + 282 * DAY));
    const late = answer(asked, 'rejected', new Date(T0 + 400 * DAY));
    expect(late.withdrawn[0]!.closed).toEqual(early.withdrawn[0]!.closed);
    expect(late.withdrawn[0]!.timeline).toEqual(early.withdrawn[0]!.timeline);
  });

  it('stays withdrawn when no word explains it: none, a word taken back, or a word on another sample', () => {
    const noWord = new IncidentFold(base, asked, ctx(new Date(T0 + 282 * DAY)));
    for (const s of [step(25, null), step(26, null), step(27, null)]) noWord.step(s);
    const late = noWord.finish();
    expect(late.withdrawn[0]!.closed).toEqual({ at: new Date(T0 + 282 * DAY).toISOString(), how: 'withdrawn' });
    const closing = late.effects.find((e): e is NotifyEffect => e.kind === 'notify' && e.type === 'wearshift.incident.closed')!;
    expect(closing.incident.reason).toBe(
      'withdrawn: a late or corrected result changed the history so that this incident no longer stands; the findings it stood on no longer hold: sample (new-oil bottle mid-charge, caution) of sample QX-1-026',
    );
    expect(closing.incident.findings).toEqual([]);
    expect(late.withdrawn[0]!.alarm).toBe('returned');
    expect(answer(asked, 'withdrawn', new Date(T0 + 282 * DAY)).withdrawn[0]!.closed?.how).toBe('withdrawn');
  });

  it('names the word only when it takes the incident away: rejected, or confirmed for a sampling incident, on the opening sample', () => {
    const opened = { kind: 'opened', at: '2026-03-01T08:00:00Z', sampleId: 'S1', severity: 'caution' } as const;
    const word = (verdict: SampleVerdict, sampleId = 'S1') => ({ kind: 'sample-verdict', at: '2026-03-02T08:00:00Z', sampleId, verdict, by: 'Jo' }) as const;
    expect(closingVerdict({ kind: 'machine', timeline: [opened, word('rejected')] })).toEqual({ sampleId: 'S1', verdict: 'rejected', by: 'Jo', at: '2026-03-02T08:00:00Z' });
    // A machine incident's opening sample confirmed genuine keeps its findings: the word does not end it.
    expect(closingVerdict({ kind: 'machine', timeline: [opened, word('confirmed')] })).toBeUndefined();
    expect(closingVerdict({ kind: 'sampling', timeline: [opened, word('confirmed')] })?.verdict).toBe('confirmed');
    expect(closingVerdict({ kind: 'sampling', timeline: [opened, word('rejected'), word('withdrawn')] })).toBeUndefined();
    expect(closingVerdict({ kind: 'sampling', timeline: [opened, word('rejected', 'S2')] })).toBeUndefined();
    expect(closureText({ how: 'resolved', by: 'Jo' })).toBe('resolved by hand');
  });
});
