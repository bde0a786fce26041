import { describe, expect, it } from 'vitest';
import { cleanlinessFindings } from '../../src/analysis/rules/cleanliness.ts';
import { ruleInput, sample, settingsFrom } from './history-fixtures.ts';

const TARGET = settingsFrom(`
groups:
  - name: pump-gearboxes
    cleanliness: { target: "17/15/12" }
`);

describe('cleanliness rule', () => {
  // Goal-based limit, common practice: one scale number over target (a doubling of particles) → caution, two → alarm.
  const samples = [
    sample(0, { sampleId: 'A', readings: { iso4406: '17/15/12' } }),
    sample(1, { sampleId: 'B', readings: { iso4406: '18/15/12' } }),
    sample(2, { sampleId: 'C', readings: { iso4406: '19/17/14' } }),
    sample(3, { sampleId: 'D', readings: { iso4406: '16/14/11' } }),
    // ISO 4406:2021 table: 1752 → 18, 517 → 16, 55 → 13: code 18/16/13, one step over target.
    sample(4, { sampleId: 'E', readings: { p4: 1752, p6: 517, p14: 55 } }),
    sample(5, { sampleId: 'F', readings: { p4: 1752, p6: '<400', p14: 55 } }),
    sample(6, { sampleId: 'G', readings: { iso4406: '-/18/12' } }),
  ];
  const findings = cleanlinessFindings(ruleInput(samples, TARGET));

  it('fires at every sample worse than the target, by steps', () => {
    expect(findings.map((f) => [f.sampleId, f.severity, f.value, f.threshold])).toEqual([
      ['B', 'caution', 1, 1],
      ['C', 'alarm', 2, 2],
      ['E', 'caution', 1, 1],
      ['G', 'alarm', 3, 2],
    ]);
    expect(findings.every((f) => f.measurand === 'iso4406' && f.rule === 'cleanliness' && f.basis === 'steps')).toBe(true);
  });

  it('explains the code against the target', () => {
    expect(findings[1]!.explanation.slice(0, 'ISO 4406 code 19/17/14 is 2 scale steps worse than the target 17/15/12; each step doubles the particle count.'.length)).toBe('ISO 4406 code 19/17/14 is 2 scale steps worse than the target 17/15/12; each step doubles the particle count.');
    expect(findings[1]!.explanation).toMatch(/\. It may point to .+; next: re-sample to confirm .+ask the lab/);
    expect(findings[2]!.explanation.slice(0, 'ISO 4406 code 18/16/13 (from the particle counts) is 1 scale step worse than the target 17/15/12; each step doubles the particle count.'.length)).toBe('ISO 4406 code 18/16/13 (from the particle counts) is 1 scale step worse than the target 17/15/12; each step doubles the particle count.');
    expect(findings[2]!.explanation).toMatch(/\. It may point to .+; next: re-sample to confirm .+ask the lab/);
  });

  it('prefers the lab code over the counts of the same sample', () => {
    const both = [sample(0, { readings: { iso4406: '17/15/12', p4: 1752, p6: 517, p14: 55 } })];
    expect(cleanlinessFindings(ruleInput(both, TARGET))).toEqual([]);
  });

  it('stays silent without a target', () => {
    expect(cleanlinessFindings(ruleInput(samples, settingsFrom('')))).toEqual([]);
  });
});
