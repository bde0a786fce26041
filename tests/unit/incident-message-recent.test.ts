/**
 * The recent results of an incident message (src/notify/incidentMessage.ts): they reach the incident's sample as its
 * latest revision stands. A correction that moves the sample time later must not leave the corrected result out of
 * "Last results" (e-mail) and `recentResults` (webhook and MQTT payload).
 */
import { describe, expect, it } from 'vitest';
import type { Sample } from '../../src/domain/event.ts';
import type { Finding } from '../../src/domain/finding.ts';
import type { IncidentEventType, IncidentSnapshot, NotifyEffect } from '../../src/incidents/model.ts';
import { incidentMessage } from '../../src/notify/incidentMessage.ts';

const DAY = 86_400_000;
const T0 = Date.parse('2026-03-01T08:00:00.000Z');

function sample(sampleId: string, time: number, fe: number, revision = 0): Sample {
  return {
    sampleId,
    revision,
    unit: 'PS2-P3',
    component: 'gearbox',
    group: 'pump-gearboxes',
    sampledAt: new Date(time).toISOString(),
    time,
    oilChanged: false,
    componentChanged: false,
    topUpLitres: 0,
    readings: { Fe: { kind: 'value', value: fe } },
  };
}

function finding(s: Sample): Finding {
  return {
    unit: s.unit,
    component: s.component,
    group: 'pump-gearboxes',
    measurand: 'Fe',
    rule: 'limit',
    severity: 'alarm',
    value: 80,
    threshold: 60,
    basis: 'reading',
    disposition: 'incident',
    sampleId: s.sampleId,
    sampledAt: s.sampledAt,
    explanation: 'Fe 80 ppm, above the alarm limit of 60 ppm.',
  };
}

function effect(type: IncidentEventType, last: Sample, incident: Partial<IncidentSnapshot> = {}): NotifyEffect {
  const id = `PS2-P3/gearbox/Fe@${last.sampleId}`;
  return {
    kind: 'notify',
    key: `${id}:2:email:0:oncall@plant.example`,
    incidentId: id,
    eventSeq: 2,
    type,
    channel: 'email',
    target: 'oncall@plant.example',
    tier: 0,
    at: new Date(last.time + DAY).toISOString(),
    incident: {
      id,
      unit: 'PS2-P3',
      component: 'gearbox',
      group: 'pump-gearboxes',
      measurand: 'Fe',
      severity: 'alarm',
      peakSeverity: 'alarm',
      state: 'active, unacknowledged',
      alarm: 'active',
      closed: false,
      openedAt: last.sampledAt,
      lastSampleId: last.sampleId,
      lastSampledAt: last.sampledAt,
      tier: 0,
      findings: [finding(last)],
      reason: 'Fe above its alarm limit.',
      ...incident,
    },
  };
}

describe('incident message: recent results', () => {
  const earlier = [sample('LAB-0040', T0 - 60 * DAY, 20), sample('LAB-0041', T0 - 30 * DAY, 30)];
  // Revision 0 of LAB-0042, the one the incident last saw, and revision 1 drawn 6 s later by the lab's correction.
  const rev0 = sample('LAB-0042', T0, 80, 0);
  const rev1 = sample('LAB-0042', T0 + 6_000, 82, 1);
  // A result stored after the event: it must stay out, or the message would change between retries.
  const later = sample('LAB-0043', T0 + 20 * DAY, 90);

  it('ends at the latest revision of the incident sample when the correction moves its time later', () => {
    // The incident still carries revision 0's time (the event queued before the correction was judged).
    const msg = incidentMessage(effect('wearshift.incident.closed', rev0, { closed: true, state: 'closed' }), [...earlier, rev0, rev1, later], 'https://wearshift.plant.example');
    expect(msg.recentResults.map((r) => r.sampleId)).toEqual(['LAB-0040', 'LAB-0041', 'LAB-0042']);
    expect(msg.recentResults.at(-1)).toMatchObject({ sampledAt: rev1.sampledAt, readings: { Fe: '82' } });
  });

  it('still ends at the incident sample, with nothing stored after it', () => {
    const msg = incidentMessage(effect('wearshift.incident.opened', rev0), [...earlier, rev0, later], 'https://wearshift.plant.example');
    expect(msg.recentResults.map((r) => r.sampleId)).toEqual(['LAB-0040', 'LAB-0041', 'LAB-0042']);
  });

  it('a closing with its evidence set aside shows the latest stored results', () => {
    const msg = incidentMessage(effect('wearshift.incident.closed', rev0, { closed: true, state: 'closed', findings: [] }), [...earlier, rev0, rev1, later], 'https://wearshift.plant.example');
    expect(msg.recentResults.map((r) => r.sampleId)).toEqual(['LAB-0040', 'LAB-0041', 'LAB-0042', 'LAB-0043']);
    expect(msg.advisory).toMatch(/wearshift advises/);
  });
});
