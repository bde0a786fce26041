import { describe, expect, it } from 'vitest';
import { toCloudEvent } from '../../src/notify/cloudEvent.ts';
import { incidentMessage } from './notify-fixtures.ts';

describe('CloudEvents envelope', () => {
  it('carries the required and optional context attributes of CloudEvents 1.0', () => {
    const msg = incidentMessage();
    const event = toCloudEvent(msg, { time: new Date('2026-03-01T08:05:00Z') });
    // CloudEvents 1.0 spec §3.1: id, source, specversion and type are REQUIRED; time, subject,
    // datacontenttype are OPTIONAL; time is an RFC 3339 timestamp.
    expect(event).toEqual({
      specversion: '1.0',
      id: 'INC-2026-0007:opened:1',
      source: '/wearshift/PS2-P3/gearbox',
      type: 'wearshift.incident.opened',
      time: '2026-03-01T08:05:00.000Z',
      datacontenttype: 'application/json',
      subject: 'INC-2026-0007',
      data: msg,
    });
  });

  it('gives the same event for the same message, so every retry carries the same bytes', () => {
    const a = JSON.stringify(toCloudEvent(incidentMessage(), { time: '2026-03-01T08:05:00Z' }));
    const b = JSON.stringify(toCloudEvent(incidentMessage(), { time: '2026-03-01T08:05:00Z' }));
    expect(a).toBe(b);
  });

  it('fills a configured source template, percent-encoding names so that they stay one path segment', () => {
    const msg = incidentMessage({ type: 'escalated' }, { unit: 'Line 2/P#3', group: 'g' });
    const event = toCloudEvent(msg, { time: '2026-03-01T08:05:00Z', sourceTemplate: 'urn:plant-a:{group}:{unit}' });
    expect(event.source).toBe('urn:plant-a:g:Line%202%2FP%233');
    expect(event.type).toBe('wearshift.incident.escalated');
    expect(() => toCloudEvent(msg, { time: '2026-03-01T08:05:00Z', sourceTemplate: '/x/{site}' })).toThrow(/unknown placeholder \{site\}/);
    expect(() => toCloudEvent(msg, { time: 'yesterday' })).toThrow(/valid date/);
  });
});
