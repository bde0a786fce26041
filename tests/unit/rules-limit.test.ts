import { describe, expect, it } from 'vitest';
import { limitFindings } from '../../src/analysis/rules/limit.ts';
import { ruleInput, sample, settingsFrom } from './history-fixtures.ts';

const SETTINGS = settingsFrom(`
groups:
  - name: pump-gearboxes
    limits:
      Fe: { caution: 150, alarm: 200 }
      water: { alarm: 1000 }
`);

describe('limit rule', () => {
  const samples = [
    sample(0, { sampleId: 'A', readings: { Fe: 100 } }),
    sample(1, { sampleId: 'B', readings: { Fe: 152 } }),
    sample(2, { sampleId: 'C', readings: { Fe: 201 } }),
    sample(3, { sampleId: 'D', readings: { Fe: 150 } }),
    sample(4, { sampleId: 'E', readings: { Fe: '>180' } }),
    sample(5, { sampleId: 'F', readings: { Fe: '>200' } }),
    sample(6, { sampleId: 'G', readings: { Fe: '<300' } }),
    sample(7, { sampleId: 'H', readings: { Cu: 900, water: 1500 } }),
  ];
  const findings = limitFindings(ruleInput(samples, SETTINGS));

  it('fires at every sample above a level, with the worst level crossed', () => {
    expect(findings.map((f) => [f.sampleId, f.measurand, f.severity, f.value, f.threshold])).toEqual([
      ['B', 'Fe', 'caution', 152, 150],
      ['C', 'Fe', 'alarm', 201, 200],
      ['E', 'Fe', 'caution', 180, 150],
      ['F', 'Fe', 'alarm', 200, 200],
      ['H', 'water', 'alarm', 1500, 1000],
    ]);
  });

  it('explains the finding in one sentence with values and units', () => {
    const f = findings[0]!;
    expect(f).toMatchObject({ unit: 'PS2-P3', component: 'gearbox', group: 'pump-gearboxes', rule: 'limit', basis: 'reading' });
    expect(f.sampledAt).toBe(samples[1]!.sampledAt);
    expect(f.explanation.slice(0, 'Fe 152 ppm is above the caution level of 150 ppm set for group pump-gearboxes.'.length)).toBe('Fe 152 ppm is above the caution level of 150 ppm set for group pump-gearboxes.');
    expect(f.explanation).toMatch(/\. It may point to .+; next: re-sample to confirm .+ask the lab/);
    expect(findings[2]!.explanation.slice(0, 'Fe >180 ppm is above the caution level of 150 ppm set for group pump-gearboxes.'.length)).toBe('Fe >180 ppm is above the caution level of 150 ppm set for group pump-gearboxes.');
    expect(findings[2]!.explanation).toMatch(/\. It may point to .+; next: re-sample to confirm .+ask the lab/);
    expect(findings[4]!.explanation.slice(0, 'Water 1500 ppm is above the alarm level of 1000 ppm set for group pump-gearboxes.'.length)).toBe('Water 1500 ppm is above the alarm level of 1000 ppm set for group pump-gearboxes.');
    expect(findings[4]!.explanation).toMatch(/\. It may point to .+; next: re-sample to confirm .+ask the lab/);
  });

  it('stays silent without configured limits', () => {
    expect(limitFindings(ruleInput(samples, settingsFrom('')))).toEqual([]);
  });
});
