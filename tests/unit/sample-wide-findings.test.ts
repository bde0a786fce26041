/**
 * A sampling check that judges the whole sample (a duplicated bottle, unit hours going back…) is filed under a
 * measurand (its key; the rule takes the first wear metal of the stored readings, copper before iron) that has
 * nothing to do with the fault. Wherever such a finding reaches people or systems it is about the `sample`: the
 * e-mail's subject and evidence, the announcement's words, the message's data, the chart the e-mail carries, the
 * bad-actor pairs of the alarm figures and the text of the command line and the board.
 */
import { describe, expect, it } from 'vitest';
import { renderIncidentEmail } from '../../src/channels/email/emailRender.ts';
import { IncidentMessageSchema } from '../../src/contracts/eventSchemas.ts';
import { ADVISORY_CAUTION } from '../../src/domain/caution.ts';
import { AlarmFiguresSchema } from '../../src/domain/alarmFiguresConfig.ts';
import { ConfigSchema } from '../../src/domain/config.ts';
import { joinedWords, SAMPLE_WIDE_CHECKS, SAMPLING_CHECKS, subjectOf, type Finding } from '../../src/domain/finding.ts';
import { alarmFigures } from '../../src/incidents/alarmFigures.ts';
import { applySteps } from '../../src/incidents/applySteps.ts';
import { emptyComponentIncidents, type NotifyEffect } from '../../src/incidents/model.ts';
import { incidentRules } from '../../src/incidents/policy.ts';
import { incidentChart } from '../../src/notify/incidentChart.ts';
import { incidentMessage } from '../../src/notify/incidentMessage.ts';
import type { ComponentStore, GroupLedger } from '../../src/pipeline/ports.ts';

const UNIT = 'PX-2';
const COMPONENT = 'gearbox';
const NOW = new Date('2026-03-01T09:00:00Z');
const config = ConfigSchema.parse({
  channels: { webhooks: [{ name: 'lab', url: 'https://lab.example/hooks', secrets: ['WEBHOOK_SECRET'] }] },
  escalation: { policies: [{ name: 'samplers', match: { kinds: ['sampling'] }, tiers: [{ afterMinutes: 0, webhooks: ['lab'] }] }] },
});
const RULES = incidentRules(config);
const sampledAt = '2026-03-01T08:00:00.000Z';
const base = { unit: UNIT, component: COMPONENT, group: 'gearboxes', sampleId: 'LAB-0107', sampledAt, rule: 'sampling', disposition: 'incident', severity: 'caution' } as const;
// As the rule files them: under the first wear metal of the stored readings, Cu.
const twin: Finding = {
  ...base,
  measurand: 'Cu',
  check: 'duplicate-bottle',
  value: 9,
  basis: 'readings',
  explanation: 'All 9 readings are identical to those of sample LAB-0101: the same bottle sent twice or a copied result.',
};
const hoursBack: Finding = {
  ...base,
  measurand: 'Cu',
  check: 'unit-hours-back',
  value: 13887,
  threshold: 16637,
  basis: 'unit hours',
  explanation: 'Unit hours 13,887 are lower than the 16,637 of the last accepted sample, LAB-0101: a wrong label or a replaced hour meter.',
};

function opened(findings: Finding[]) {
  const result = applySteps(emptyComponentIncidents(UNIT, COMPONENT), [{ sampleId: 'LAB-0107', sampledAt, findings }], { group: 'gearboxes', now: NOW, quietBefore: new Date(0), rules: RULES });
  const effect = result.effects.find((e): e is NotifyEffect => e.kind === 'notify' && e.type === 'wearshift.incident.opened')!;
  return { effect, incident: Object.values(result.state.incidents)[0]! };
}

describe('findings about the whole sample', () => {
  it('every sampling check but a single metal far below the charge and a falling wear rate is about the whole sample', () => {
    expect(SAMPLING_CHECKS.filter((c) => !(SAMPLE_WIDE_CHECKS as readonly string[]).includes(c))).toEqual(['reading-drop', 'rate-fall']);
    for (const check of SAMPLE_WIDE_CHECKS) expect(subjectOf({ measurand: 'Cu', rule: 'sampling', check })).toBe('sample');
    expect(subjectOf({ measurand: 'Fe', rule: 'sampling', check: 'reading-drop' })).toBe('Fe');
  });

  it('the e-mail names the sample and the fault in its subject and evidence, never copper', () => {
    const { effect } = opened([twin, hoursBack]);
    expect(effect.incident.id).toBe('PX-2/gearbox/sampling@LAB-0107');
    const mail = renderIncidentEmail(incidentMessage(effect, [], 'https://wearshift.plant.example'), { from: 'wearshift <alerts@plant.example>', to: 'lab@plant.example' });
    expect(mail.subject).toBe('[wearshift caution] PX-2 / gearbox: New incident — sample: unit hours back, duplicated bottle');
    // The HTML part read without its tags.
    for (const part of [mail.text, mail.html.replace(/<[^>]+>/g, '')]) {
      expect(part).toContain('sample, sampling rule, caution: duplicated bottle, all 9 readings identical to an earlier sample (sample LAB-0107');
      expect(part).toContain('sample, sampling rule, caution: unit hours 13887, lower than 16637 of the last sample (sample LAB-0107');
      expect(part).toContain('sample (duplicated bottle, caution), sample (unit hours back, caution)');
      expect(part).not.toContain('against its limit');
      expect(part).not.toMatch(/\bCu\b/);
    }
    // The caution stays in both parts.
    expect(mail.text).toContain(ADVISORY_CAUTION);
    expect(mail.html).toContain(ADVISORY_CAUTION.replace(/'/g, '&#39;'));
  });

  it('the message data says what a finding is about beside the measurand it is filed under, valid against the published schema', () => {
    const { effect } = opened([hoursBack]);
    const msg = incidentMessage(effect, [], 'https://wearshift.plant.example');
    expect(msg.findings).toMatchObject([{ measurand: 'Cu', subject: 'sample', rule: 'sampling', check: 'unit-hours-back' }]);
    expect(msg.whatChanged).toBe('new incident, caution: sample (unit hours back, caution)');
    expect(IncidentMessageSchema.safeParse(msg).success).toBe(true);
    expect(IncidentMessageSchema.safeParse({ ...msg, findings: [{ ...msg.findings[0], subject: undefined }] }).success).toBe(false);
  });

  it('says what joined an incident in words: a metal by its name, a fault of the whole sample by its check in words', () => {
    const joined = joinedWords(
      [
        { measurand: 'Cu', rule: 'sampling', check: 'duplicate-bottle' },
        { measurand: 'Fe', rule: 'limit' },
      ],
      ['Cu', 'Fe'],
    );
    expect(joined).toBe('Fe, sample (duplicated bottle)');
    expect(joined).not.toContain('duplicate-bottle');
  });

  it('an e-mail about the whole sample carries no metal trend chart: nothing is read to draw one', async () => {
    const { effect } = opened([twin, hoursBack]);
    const untouched = new Proxy({}, { get: (_t, name) => { throw new Error(`read ${String(name)}`); } });
    await expect(incidentChart(untouched as ComponentStore, untouched as GroupLedger, config, effect)).resolves.toBeUndefined();
  });

  it('the bad-actor pairs (and their gauge) count the sampling rule with the sample, not with copper', () => {
    const { incident } = opened([twin, hoursBack]);
    const figures = alarmFigures({
      incidents: [incident],
      from: Date.parse('2026-02-01T00:00:00Z'),
      to: Date.parse('2026-03-02T00:00:00Z'),
      thresholds: AlarmFiguresSchema.parse({}),
      responders: { all: [], of: () => [] },
    });
    expect(figures.badActors.pairs).toEqual([{ rule: 'sampling', measurand: 'sample', incidents: 1 }]);
    // A timeline entry recorded before entries kept their check has only its measurand to go by.
    const older = { ...incident, timeline: incident.timeline.map((e) => (e.kind === 'finding' ? (({ check: _c, ...rest }) => rest)(e) : e)) };
    const legacy = alarmFigures({ incidents: [older], from: Date.parse('2026-02-01T00:00:00Z'), to: Date.parse('2026-03-02T00:00:00Z'), thresholds: AlarmFiguresSchema.parse({}), responders: { all: [], of: () => [] } });
    expect(legacy.badActors.pairs).toEqual([{ rule: 'sampling', measurand: 'Cu', incidents: 1 }]);
  });
});
