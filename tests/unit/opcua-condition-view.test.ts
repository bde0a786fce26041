/** How an incident is shown as an OPC UA alarm condition: states and severity bands of IEC 62541-9 (OPC UA Part 9). */
import { describe, expect, it } from 'vitest';
import type { Incident } from '../../src/incidents/model.ts';
import { conditionView, ONE_SHOT_REASON, OPCUA_SEVERITY } from '../../src/opcua/conditionView.ts';

const base = {
  id: 'PS2-P3/gearbox@LAB-1',
  unit: 'PS2-P3',
  component: 'gearbox',
  alarm: 'active',
  severity: 'caution',
  evidence: [{ measurand: 'Fe', rule: 'cusum', severity: 'caution', explanation: 'Fe wear rate shifted up' }],
  acknowledged: null,
  shelved: null,
  closed: null,
  openedAt: '2026-04-01T08:00:00.000Z',
  timeline: [{ kind: 'opened', at: '2026-04-01T08:00:00.000Z' }],
} as unknown as Incident;

describe('conditionView', () => {
  it('puts watch, caution and alarm inside Part 9 severity bands (from memory: 201-400 medium low, 401-600 medium, 601-800 medium high), in rising order', () => {
    expect(OPCUA_SEVERITY.watch).toBeGreaterThanOrEqual(201);
    expect(OPCUA_SEVERITY.watch).toBeLessThanOrEqual(400);
    expect(OPCUA_SEVERITY.caution).toBeGreaterThanOrEqual(401);
    expect(OPCUA_SEVERITY.caution).toBeLessThanOrEqual(600);
    expect(OPCUA_SEVERITY.alarm).toBeGreaterThanOrEqual(601);
    expect(OPCUA_SEVERITY.alarm).toBeLessThanOrEqual(800);
  });

  it('an open, unacknowledged incident is active, unacked, unconfirmed and retained, and its message carries the caution', () => {
    const v = conditionView(base);
    expect(v).toMatchObject({ active: true, acked: false, confirmed: false, retain: true, shelving: 'Unshelved', severity: 500 });
    expect(v.message).toContain('wearshift advises');
    expect(v.evidence).toEqual(['Fe cusum caution: Fe wear rate shifted up']);
  });

  it('returned and acknowledged: inactive; closed: confirmed and no longer retained', () => {
    const acked = { ...base, alarm: 'returned', acknowledged: { by: 'x', at: '2026-04-02T08:00:00Z', note: 'seen' } } as unknown as Incident;
    expect(conditionView(acked)).toMatchObject({ active: false, acked: true, confirmed: false, retain: true });
    const closed = { ...acked, closed: { at: '2026-04-03T08:00:00Z', how: 'acknowledged-and-returned' } } as unknown as Incident;
    expect(conditionView(closed)).toMatchObject({ active: false, confirmed: true, retain: false });
  });

  it('tells timed from one-shot shelving by the reason the OneShotShelve method writes', () => {
    const timed = { ...base, shelved: { by: 'x', at: '2026-04-02T08:00:00.000Z', until: '2026-04-02T10:00:00.000Z', reason: 'pump swap' } } as unknown as Incident;
    expect(conditionView(timed)).toMatchObject({ shelving: 'TimedShelved', unshelveAt: Date.parse('2026-04-02T10:00:00Z'), shelvedAt: Date.parse('2026-04-02T08:00:00Z') });
    const oneShot = { ...base, shelved: { by: 'x', at: '2026-04-02T08:00:00.000Z', until: '2026-04-03T08:00:00.000Z', reason: `${ONE_SHOT_REASON}: until normal` } } as unknown as Incident;
    expect(conditionView(oneShot).shelving).toBe('OneShotShelved');
  });
});
