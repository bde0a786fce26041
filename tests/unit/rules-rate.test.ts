import { describe, expect, it } from 'vitest';
import { rateFindings } from '../../src/analysis/rules/rate.ts';
import { ruleInput, sample, settingsFrom } from './history-fixtures.ts';

const SETTINGS = settingsFrom(`
groups:
  - name: pump-gearboxes
    rateLimits:
      Fe: { caution: 5, alarm: 10 }
      Si: { caution: 1 }
`);

describe('rate rule', () => {
  // No sump volume: no make-up correction. Rates per 100 h: B (20−10)/250·100 = 4, C 15/250·100 = 6,
  // D 27/250·100 = 10.8; E is censored; F is a component change (running-in); G: 30/250·100 = 12, still
  // within 250 h of the change (running-in); H: 35/250·100 = 14 after running-in.
  const samples = [
    sample(0, { sampleId: 'A', unitHours: 1000, oilHours: 100, readings: { Fe: 10, Si: 1 } }),
    sample(10, { sampleId: 'B', unitHours: 1250, oilHours: 350, readings: { Fe: 20, Si: 9 } }),
    sample(20, { sampleId: 'C', unitHours: 1500, oilHours: 600, readings: { Fe: 35 } }),
    sample(30, { sampleId: 'D', unitHours: 1750, oilHours: 850, readings: { Fe: 62 } }),
    sample(40, { sampleId: 'E', unitHours: 2000, oilHours: 1100, readings: { Fe: '>90' } }),
    sample(50, { sampleId: 'F', unitHours: 2100, oilHours: 10, oilChanged: true, componentChanged: true, readings: { Fe: 20 } }),
    sample(60, { sampleId: 'G', unitHours: 2350, oilHours: 260, readings: { Fe: 50 } }),
    sample(70, { sampleId: 'H', unitHours: 2600, oilHours: 510, readings: { Fe: 85 } }),
  ];
  const findings = rateFindings(ruleInput(samples, SETTINGS));

  it('fires on intervals above the rate levels, skipping censored and running-in intervals', () => {
    expect(findings.map((f) => [f.sampleId, f.severity, f.threshold])).toEqual([
      ['C', 'caution', 5],
      ['D', 'alarm', 10],
      ['H', 'alarm', 10],
    ]);
    expect(findings.map((f) => f.value)).toEqual([expect.closeTo(6, 10), expect.closeTo(10.8, 10), expect.closeTo(14, 10)]);
  });

  it('judges wear metals only: contaminants have no wear intervals', () => {
    expect(findings.every((f) => f.measurand === 'Fe')).toBe(true);
  });

  it('explains the rate with the increment, the hours and the level', () => {
    expect(findings[0]).toMatchObject({ rule: 'rate', basis: 'rate', group: 'pump-gearboxes' });
    expect(findings[0]!.explanation.slice(0, 'Fe gained 15 ppm in 250 h on this charge (6 ppm per 100 h), above the caution rate of 5 ppm per 100 h set for group pump-gearboxes.'.length)).toBe('Fe gained 15 ppm in 250 h on this charge (6 ppm per 100 h), above the caution rate of 5 ppm per 100 h set for group pump-gearboxes.');
    expect(findings[0]!.explanation).toMatch(/\. It may point to .+; next: re-sample to confirm .+ask the lab/);
  });
});
