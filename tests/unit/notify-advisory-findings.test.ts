/**
 * Advisory findings at an incident's sample reach people beside the evidence, never in it (pure engine and message
 * mapping): the snapshot a notification carries holds them apart, the message gives them a field of their own, and
 * the incident's severity stays the evidence's however severe an advisory finding reads.
 */
import { describe, expect, it } from 'vitest';
import { ConfigSchema } from '../../src/domain/config.ts';
import type { Finding } from '../../src/domain/finding.ts';
import { applySteps } from '../../src/incidents/applySteps.ts';
import { emptyComponentIncidents, type NotifyEffect } from '../../src/incidents/model.ts';
import { incidentRules } from '../../src/incidents/policy.ts';
import { incidentMessage } from '../../src/notify/incidentMessage.ts';
import { IncidentMessageSchema } from '../../src/contracts/eventSchemas.ts';
import { ADVISORY_CAUTION } from '../../src/domain/caution.ts';

const UNIT = 'PS2-P3';
const COMPONENT = 'gearbox';
const NOW = new Date('2026-03-01T09:00:00Z');
const RULES = incidentRules(
  ConfigSchema.parse({
    channels: { webhooks: [{ name: 'ops', url: 'https://ops.example/hooks', secrets: ['WEBHOOK_SECRET'] }] },
    escalation: { policies: [{ name: 'all', tiers: [{ afterMinutes: 0, webhooks: ['ops'] }] }] },
  }),
);
const sampledAt = '2026-03-01T08:00:00.000Z';
const base = { unit: UNIT, component: COMPONENT, group: 'gearboxes', sampleId: 'LAB-0042', sampledAt, basis: 'reading' } as const;
const evidence: Finding = { ...base, measurand: 'Fe', rule: 'limit', disposition: 'incident', severity: 'watch', value: 48, threshold: 45, explanation: 'Fe above its watch level.' } as Finding;
const band: Finding = { ...base, measurand: 'Cu', rule: 'population', disposition: 'advisory', severity: 'alarm', value: 40, threshold: 24, explanation: 'Cu above the gearbox population band for 750 oil hours (mean + 2σ).' } as Finding;

describe('advisory findings in the notification', () => {
  const result = applySteps(emptyComponentIncidents(UNIT, COMPONENT), [{ sampleId: 'LAB-0042', sampledAt, findings: [evidence, band] }], { group: 'gearboxes', now: NOW, quietBefore: new Date(0), rules: RULES });
  const effect = result.effects.find((e): e is NotifyEffect => e.kind === 'notify' && e.type === 'wearshift.incident.opened')!;

  it('travel in the snapshot apart from the evidence, and leave the severity to the evidence', () => {
    expect(effect.incident.findings).toEqual([evidence]);
    expect(effect.incident.advisoryFindings).toEqual([band]);
    expect(effect.incident.severity).toBe('watch');
    expect(effect.incident.reason).not.toContain('Cu');
  });

  it('become a field of their own in the message, valid against the published event schema, with the caution', () => {
    const msg = incidentMessage(effect, [], 'https://wearshift.plant.example');
    expect(msg.findings.map((f) => f.measurand)).toEqual(['Fe']);
    expect(msg.advisoryFindings).toEqual([
      { measurand: 'Cu', subject: 'Cu', rule: 'population', severity: 'alarm', value: 40, threshold: 24, basis: 'reading', sampleId: 'LAB-0042', sampledAt, explanation: 'Cu above the gearbox population band for 750 oil hours (mean + 2σ).' },
    ]);
    expect(msg.incident.severity).toBe('watch');
    expect(msg.advisory).toBe(ADVISORY_CAUTION);
    expect(IncidentMessageSchema.safeParse(msg).success).toBe(true);
  });

  it('are an empty list for a message queued before the snapshot carried them', () => {
    const { advisoryFindings: _none, ...older } = effect.incident;
    const msg = incidentMessage({ ...effect, incident: older }, [], 'https://wearshift.plant.example');
    expect(msg.advisoryFindings).toEqual([]);
    expect(msg.findings).toHaveLength(1);
  });
});
