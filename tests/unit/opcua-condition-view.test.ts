/** How an incident is shown as an OPC UA alarm condition: states and severity bands of IEC 62541-9 (OPC UA Part 9). */
import { describe, expect, it } from 'vitest';
import type { Incident } from '../../src/incidents/model.ts';
import { ADVISORY_TEXT } from '../../src/opcua/advisory.ts';
import { conditionView, ONE_SHOT_REASON, OPCUA_SEVERITY, OPCUA_SEVERITY_NONE } from '../../src/opcua/conditionView.ts';

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

describe('conditionView of a closing whose evidence was set aside', () => {
  const finding = (over: object) => ({ measurand: 'Fe', rule: 'limit', severity: 'caution', sampleId: 'D-16-2', explanation: 'Fe above the caution level', ...over });
  const setAside = (closed: object, withdrawnEvidence: object[]) =>
    ({ ...base, alarm: 'returned', evidence: [], withdrawnEvidence, closed, timeline: [...(base.timeline as object[]), { kind: 'closed', ...closed }] }) as unknown as Incident;

  it('withdrawn: the lowest OPC UA severity, no evidence, and a message that names what no longer holds, with the caution', () => {
    const v = conditionView(setAside({ at: '2026-04-03T08:00:00.000Z', how: 'withdrawn' }, [finding({})]));
    expect(OPCUA_SEVERITY_NONE).toBe(1);
    expect(OPCUA_SEVERITY_NONE).toBeLessThan(Math.min(...Object.values(OPCUA_SEVERITY)));
    expect(v).toMatchObject({ severity: OPCUA_SEVERITY_NONE, active: false, acked: false, confirmed: true, retain: false, evidence: [] });
    expect(v.message).toBe(
      `closed PS2-P3/gearbox: withdrawn: a late or corrected result changed the history so that this incident no longer stands; the findings it stood on no longer hold: Fe (limit, caution) of sample D-16-2; severity none: nothing of it stands and nothing is asked (last announced as caution) (${ADVISORY_TEXT})`,
    );
  });

  it('a sample rejected by a responder: its sampling findings were borne out, its other findings no longer hold; a sample confirmed: none holds', () => {
    const sampling = finding({ measurand: 'Fe', rule: 'sampling', check: 'duplicate-bottle' });
    const rejected = conditionView(setAside({ at: '2026-04-03T08:00:00.000Z', how: 'sample-verdict', by: 'Ben Sampler', sampleId: 'D-16-2', verdict: 'rejected' }, [sampling, finding({ measurand: 'Cu' })]));
    expect(rejected.severity).toBe(OPCUA_SEVERITY_NONE);
    expect(rejected.message).toContain('closed: sample D-16-2 rejected by Ben Sampler (sample judged wrong; kept out of the trend)');
    expect(rejected.message).toContain('the sampling findings it was raised on were borne out: sample (duplicated bottle, caution) of sample D-16-2; the findings it stood on no longer hold: Cu (limit, caution) of sample D-16-2');
    expect(rejected.message).toContain('severity none: nothing of it stands');
    const confirmed = conditionView(setAside({ at: '2026-04-03T08:00:00.000Z', how: 'sample-verdict', by: 'Ben Sampler', sampleId: 'D-16-2', verdict: 'confirmed' }, [sampling]));
    expect(confirmed.severity).toBe(OPCUA_SEVERITY_NONE);
    expect(confirmed.message).toContain('the findings it stood on no longer hold: sample (duplicated bottle, caution) of sample D-16-2');
    expect(confirmed.message).not.toContain('borne out');
  });

  it('a long list of findings set aside is cut short, never the caution at the end of the message', () => {
    const many = Array.from({ length: 200 }, (_, i) => finding({ sampleId: `D-16-${i}` }));
    const v = conditionView(setAside({ at: '2026-04-03T08:00:00.000Z', how: 'withdrawn' }, many));
    expect(v.message.length).toBeLessThanOrEqual(2000);
    expect(v.message.endsWith(`severity none: nothing of it stands and nothing is asked (last announced as caution) (${ADVISORY_TEXT})`)).toBe(true);
  });

  it('a closing of any other kind keeps the severity it had: resolved by hand, or acknowledged and returned', () => {
    for (const how of ['resolved', 'acknowledged-and-returned', 'returned-unannounced']) {
      const closed = { ...base, alarm: 'returned', closed: { at: '2026-04-03T08:00:00.000Z', how } } as unknown as Incident;
      expect(conditionView(closed).severity, how).toBe(OPCUA_SEVERITY.caution);
      expect(conditionView(closed).message, how).toMatch(/^caution PS2-P3\/gearbox: /);
    }
  });
});
