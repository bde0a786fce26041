/**
 * The closing messages of incidents whose evidence was set aside (withdrawn, or answered by a word on the sample that
 * opened them), from the pure engine through the message to the e-mail and the CloudEvent: they ask nothing, so they
 * carry no severity a mail rule would page on; they say how the incident closed in fields a receiver can act on; a
 * sample rejected as its sampling finding said is told as that finding borne out, not as a finding that was wrong.
 * Returned and closed messages carry no forecast made on the evidence's sample; findings travel most severe first.
 */
import { describe, expect, it } from 'vitest';
import { ConfigSchema } from '../../src/domain/config.ts';
import type { Finding } from '../../src/domain/finding.ts';
import type { LimitForecast } from '../../src/analysis/forecast/model.ts';
import { applySteps } from '../../src/incidents/applySteps.ts';
import { IncidentFold } from '../../src/incidents/incidentFold.ts';
import { emptyComponentIncidents, type ComponentIncidents, type NotifyEffect, type SampleVerdict } from '../../src/incidents/model.ts';
import { incidentRules } from '../../src/incidents/policy.ts';
import { applySampleVerdict } from '../../src/incidents/sampleVerdict.ts';
import { incidentMessage } from '../../src/notify/incidentMessage.ts';
import { toCloudEvent } from '../../src/notify/cloudEvent.ts';
import { renderIncidentEmail } from '../../src/channels/email/emailRender.ts';
import { IncidentCloudEventSchema } from '../../src/contracts/eventSchemas.ts';
import { ADVISORY_CAUTION } from '../../src/domain/caution.ts';

const UNIT = 'GB-8';
const COMPONENT = 'gearbox';
const T0 = Date.parse('2026-03-01T08:00:00Z');
const DAY = 86_400_000;
const RULES = incidentRules(
  ConfigSchema.parse({
    channels: { webhooks: [{ name: 'samplers', url: 'https://samplers.example/hooks', secrets: ['WEBHOOK_SECRET'] }] },
    escalation: { policies: [{ name: 'samplers', match: { kinds: ['sampling'] }, tiers: [{ afterMinutes: 0, webhooks: ['samplers'] }] }] },
  }),
);
const BASE_URL = 'https://wearshift.plant.example';
const MAIL = { from: 'wearshift <alerts@plant.example>', to: 'duty@plant.example' };

/** Sample GB-8-L<n>; at L2 a bottle whose readings repeat an earlier sample's, an alarm (a duplicated bottle). */
function step(n: number, twin: boolean) {
  const sampleId = `GB-8-L${n}`;
  const sampledAt = new Date(T0 + n * 10 * DAY).toISOString();
  const findings: Finding[] = twin
    ? [{ unit: UNIT, component: COMPONENT, group: 'gearboxes', measurand: 'Cu', rule: 'sampling', check: 'duplicate-bottle', disposition: 'incident', severity: 'alarm', value: 9, basis: 'reading', sampleId, sampledAt, explanation: 'All 9 readings are identical to sample GB-8-L1.' } as Finding]
    : [];
  return { sampleId, sampledAt, findings };
}

const ctx = (now: Date) => ({ group: 'gearboxes', now, quietBefore: new Date(0), rules: RULES });
const base = emptyComponentIncidents(UNIT, COMPONENT);
const asked = applySteps(base, [step(1, false), step(2, true), step(3, false)], ctx(new Date(T0 + 40 * DAY))).state;
const wordAt = new Date(T0 + 41 * DAY);

/** The closing effect after the history is folded again without the sample's finding: with a word on it, or none (withdrawn). */
function closing(verdict?: SampleVerdict): NotifyEffect {
  const state: ComponentIncidents = verdict === undefined ? asked : applySampleVerdict(asked, [], { sampleId: 'GB-8-L2', verdict, by: 'Ben Sampler', now: wordAt }, RULES).state;
  const fold = new IncidentFold(base, state, ctx(new Date(T0 + 42 * DAY)));
  for (const s of [step(1, false), step(2, false), step(3, false)]) fold.step(s);
  const effect = fold.finish().effects.find((e): e is NotifyEffect => e.kind === 'notify' && e.type === 'wearshift.incident.closed');
  expect(effect).toBeDefined();
  return effect!;
}

const messageOf = (effect: NotifyEffect) => incidentMessage(effect, [], BASE_URL);

describe('a closing whose evidence was set aside', () => {
  it('is announced as an alarm before (the severity the closing would otherwise repeat)', () => {
    expect(Object.values(asked.incidents)[0]!.severity).toBe('alarm');
  });

  for (const [name, verdict] of [['withdrawn by a late result', undefined], ['answered by a rejected sample', 'rejected'], ['answered by a confirmed sample', 'confirmed']] as const) {
    it(`${name}: carries no severity that pages, in the subject, the header or the first line`, () => {
      const mail = renderIncidentEmail(messageOf(closing(verdict)), MAIL);
      expect(mail.subject).toMatch(/^\[wearshift closed\] GB-8 \/ gearbox: /);
      expect(mail.subject).not.toMatch(/alarm|no findings attached/);
      expect(mail.headers['X-Wearshift-Severity']).toBe('none');
      const first = mail.text.split('\n')[0]!;
      expect(first).toContain(': closed (last announced as alarm). ');
      expect(first).not.toMatch(/: alarm\./);
      // The caution stays wherever findings were named.
      expect(mail.text).toContain(ADVISORY_CAUTION);
    });
  }

  it('says how it closed in fields, valid against the published schema', () => {
    const withdrawn = messageOf(closing());
    expect(withdrawn.incident.closed).toEqual({ how: 'withdrawn', at: new Date(T0 + 42 * DAY).toISOString() });
    const rejected = messageOf(closing('rejected'));
    expect(rejected.incident.closed).toEqual({ how: 'sample-verdict', at: wordAt.toISOString(), by: 'Ben Sampler', sampleId: 'GB-8-L2', verdict: 'rejected' });
    expect(rejected.findings).toEqual([]);
    for (const msg of [withdrawn, rejected]) expect(IncidentCloudEventSchema.safeParse(toCloudEvent(msg, { time: wordAt })).success).toBe(true);
  });

  it('told of a sample rejected as its sampling finding said: the finding borne out, named in words, not reported as wrong', () => {
    const msg = messageOf(closing('rejected'));
    expect(msg.whatChanged).toBe(
      'closed: sample GB-8-L2 rejected by Ben Sampler (sample judged wrong; kept out of the trend); the sampling findings it was raised on were borne out: sample (duplicated bottle, alarm) of sample GB-8-L2',
    );
    const mail = renderIncidentEmail(msg, MAIL);
    expect(mail.subject).toBe('[wearshift closed] GB-8 / gearbox: Closed by a sample verdict: GB-8-L2 rejected by Ben Sampler');
    expect(mail.text).not.toMatch(/no longer (hold|give)/);
    expect(mail.text).toContain('A responder judged the sample wrong, as the sampling findings named under What changed said');
  });

  it('told of a sample confirmed as genuine, or a withdrawal: the findings it stood on no longer hold', () => {
    const confirmed = messageOf(closing('confirmed'));
    expect(confirmed.whatChanged).toContain('the findings it stood on no longer hold: sample (duplicated bottle, alarm) of sample GB-8-L2');
    expect(renderIncidentEmail(confirmed, MAIL).subject).toBe('[wearshift closed] GB-8 / gearbox: Closed by a sample verdict: GB-8-L2 confirmed by Ben Sampler');
    const withdrawn = renderIncidentEmail(messageOf(closing()), MAIL);
    expect(withdrawn.subject).toBe('[wearshift closed] GB-8 / gearbox: Withdrawn, no longer stands');
    expect(withdrawn.text).toContain('The results as they stand now no longer give the findings this incident was raised on');
  });
});

describe('forecasts and the order of findings in a message', () => {
  const forecast: LimitForecast = { measurand: 'Fe', source: 'fixed', severity: 'caution', side: 'above', level: 100, outcome: 'crossing', central: { oilHours: 900, hoursFromNow: 150 }, text: 'Fe reaches its caution level 100 ppm in about 150 h.' };
  const finding = (measurand: 'Fe' | 'Cu', severity: Finding['severity']): Finding =>
    ({ unit: UNIT, component: COMPONENT, group: 'gearboxes', measurand, rule: 'limit', disposition: 'incident', severity, value: 60, threshold: 50, basis: 'reading', sampleId: 'GB-8-L3', sampledAt: new Date(T0 + 30 * DAY).toISOString(), explanation: `${measurand} above its limit.` }) as Finding;
  const effect = (type: NotifyEffect['type']): NotifyEffect => {
    const e = closing();
    return { ...e, type, incident: { ...e.incident, closed: type === 'wearshift.incident.closed', findings: [finding('Cu', 'watch'), finding('Fe', 'alarm')], forecast: [forecast] } };
  };

  it('leaves the forecast, made on the evidence’s sample, out of returned and closed messages and their e-mails', () => {
    const opened = messageOf(effect('wearshift.incident.opened'));
    expect(opened.forecast?.items.map((f) => f.text)).toEqual([forecast.text]);
    expect(renderIncidentEmail(opened, MAIL).text).toContain('Time to limit');
    for (const type of ['wearshift.incident.returned', 'wearshift.incident.closed'] as const) {
      const msg = messageOf(effect(type));
      expect(msg.forecast, type).toBeUndefined();
      expect(renderIncidentEmail(msg, MAIL).text, type).not.toContain('Time to limit');
      // A message queued before: the e-mail does not show it either.
      expect(renderIncidentEmail({ ...msg, forecast: opened.forecast! }, MAIL).text, type).not.toContain('Time to limit');
    }
  });

  it('carries the findings most severe first, as the e-mail shows them', () => {
    expect(messageOf(effect('wearshift.incident.opened')).findings.map((f) => [f.measurand, f.severity])).toEqual([
      ['Fe', 'alarm'],
      ['Cu', 'watch'],
    ]);
  });
});
