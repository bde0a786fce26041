/**
 * The stored text of a findings-log step (src/redis/stepRecordText.ts): what each finding shares with its step is left
 * out and put back on reading, so a step reads back equal, key order included; a record written before (every field in
 * each finding, deflated or plain) reads the same; a finding that names another sample or group keeps its own.
 */
import { describe, expect, it } from 'vitest';
import type { Finding } from '../../src/domain/finding.ts';
import type { StepRecord } from '../../src/pipeline/ports.ts';
import { z2Form } from '../helpers/earlierStoredForms.ts';
import { stepRecordOf, stepRecordText } from '../../src/redis/stepRecordText.ts';

const ref = { unit: 'PS4-P2', component: 'gearbox' };
const finding = (over: Partial<Finding>): Finding =>
  ({
    unit: ref.unit,
    component: ref.component,
    group: 'station-gearboxes',
    sampleId: 'S-41',
    sampledAt: '2026-03-04T10:00:00.000Z',
    measurand: 'Fe',
    rule: 'population',
    disposition: 'advisory',
    severity: 'caution',
    value: 25,
    threshold: 22.87,
    basis: 'reading',
    explanation: 'Fe 25 ppm at 462 oil hours is above the population caution level of 22.9 ppm.',
    ...over,
  }) as Finding;
const step: StepRecord = {
  sampleId: 'S-41',
  sampledAt: '2026-03-04T10:00:00.000Z',
  findings: [finding({}), finding({ measurand: 'Cu', value: 5.4, threshold: 5.02 }), finding({ rule: 'cusum', disposition: 'incident', severity: 'watch' } as Partial<Finding>)],
};

describe('a findings-log step as stored', () => {
  it('reads back equal, key order included, and shorter than the whole record', () => {
    const text = stepRecordText(ref, step);
    expect(JSON.stringify(stepRecordOf(ref, text))).toBe(JSON.stringify(step));
    expect(text.length).toBeLessThan(z2Form(JSON.stringify(step)).length);
  });

  it('reads a record written before, deflated or plain, the same', () => {
    expect(stepRecordOf(ref, z2Form(JSON.stringify(step)))).toEqual(step);
    const short: StepRecord = { ...step, findings: [finding({ explanation: 'short' })] };
    expect(stepRecordOf(ref, JSON.stringify(short))).toEqual(short);
  });

  it('keeps what a finding does not share with its step', () => {
    const mixed: StepRecord = { ...step, findings: [finding({}), finding({ sampleId: 'S-40', sampledAt: '2026-02-01T10:00:00.000Z', group: 'other-group' })] };
    expect(stepRecordOf(ref, stepRecordText(ref, mixed))).toEqual(mixed);
    const statusOnly: StepRecord = { sampleId: 'S-42', sampledAt: '2026-04-01T10:00:00.000Z', findings: [], status: 'in-doubt' };
    expect(stepRecordOf(ref, stepRecordText(ref, statusOnly))).toEqual(statusOnly);
  });
});
