import { describe, expect, it } from 'vitest';
import { conditionFindings } from '../../src/analysis/rules/condition.ts';
import type { ResultEvent } from '../../src/domain/event.ts';
import { ruleInput, sample, settingsFrom } from './history-fixtures.ts';

const WITH_NEW_OIL = settingsFrom(`
groups:
  - name: pump-gearboxes
    newOil: { tbn: 8, tan: 1.5, v40: 220, v100: 19, oxidation: 10 }
`);
const WITHOUT_NEW_OIL = settingsFrom('');

const judge = (readings: ResultEvent['readings'], settings = WITH_NEW_OIL) =>
  conditionFindings(ruleInput([sample(0, { sampleId: 'A', readings })], settings)).map((f) => [f.measurand, f.severity, f.value, f.threshold]);

describe('condition rule: base number', () => {
  // Common practice: TBN may fall to about half of new (tbnFallFraction 0.5 → alarm below 4 mg KOH/g for 8 new);
  // caution midway, 0.75 × 8 = 6 mg KOH/g (our own choice).
  it('cautions below the midway level and alarms below half of new', () => {
    expect(judge({ tbn: 6.5 })).toEqual([]);
    expect(judge({ tbn: 5.9 })).toEqual([['tbn', 'caution', 5.9, 6]]);
    expect(judge({ tbn: 3.9 })).toEqual([['tbn', 'alarm', 3.9, 4]]);
    expect(judge({ tbn: '<4' })).toEqual([['tbn', 'alarm', 4, 4]]);
    expect(judge({ tbn: '>2' })).toEqual([]);
  });

  it('explains the fall against new oil', () => {
    const [f] = conditionFindings(ruleInput([sample(0, { readings: { tbn: 3.9 } })], WITH_NEW_OIL));
    expect(f!.explanation.slice(0, 'Base number (TBN) 3.9 mg KOH/g is below the alarm level of 4 mg KOH/g (0.5 of the new-oil 8 mg KOH/g).'.length)).toBe('Base number (TBN) 3.9 mg KOH/g is below the alarm level of 4 mg KOH/g (0.5 of the new-oil 8 mg KOH/g).');
    expect(f!.explanation).toMatch(/\. It may point to .+; next: re-sample to confirm .+ask the lab/);
  });

  it('follows a configured fall fraction', () => {
    const settings = settingsFrom(`
condition: { tbnFallFraction: 0.4 }
groups:
  - name: pump-gearboxes
    newOil: { tbn: 10 }
`);
    // Alarm below 0.4 × 10 = 4; caution below (1 + 0.4)/2 × 10 = 7.
    expect(judge({ tbn: 6.9 }, settings)).toEqual([['tbn', 'caution', 6.9, 7]]);
    expect(judge({ tbn: 4.5 }, settings)).toEqual([['tbn', 'caution', 4.5, 7]]);
    expect(judge({ tbn: 3.9 }, settings)).toEqual([['tbn', 'alarm', 3.9, 4]]);
  });
});

describe('condition rule: acid number, viscosity, oxidation', () => {
  it('judges the TAN rise over new oil', () => {
    expect(judge({ tan: 2.4 })).toEqual([]);
    expect(judge({ tan: 2.6 })).toEqual([['tan', 'caution', 2.6, 2.5]]);
    expect(judge({ tan: 3.6 })).toEqual([['tan', 'alarm', 3.6, 3.5]]);
  });

  it('judges a viscosity change either way in percent of new', () => {
    // Common practice for industrial oils: ±10 % caution, ±20 % alarm. 245/220 = +11.4 %; 170/220 = −22.7 %.
    expect(judge({ v40: 230 })).toEqual([]);
    const up = judge({ v40: 245 });
    expect(up).toEqual([['v40', 'caution', expect.closeTo(11.3636, 3), 10]]);
    expect(judge({ v40: 170 })).toEqual([['v40', 'alarm', expect.closeTo(-22.727, 2), -20]]);
    expect(judge({ v100: 16.9 })).toEqual([['v100', 'caution', expect.closeTo(-11.05, 2), -10]]);
    const [f] = conditionFindings(ruleInput([sample(0, { readings: { v40: 170 } })], WITH_NEW_OIL));
    expect(f!.explanation.slice(0, 'Viscosity at 40 °C 170 mm²/s is 22.7 % below the new-oil 220 mm²/s, more than the alarm change of 20 %.'.length)).toBe('Viscosity at 40 °C 170 mm²/s is 22.7 % below the new-oil 220 mm²/s, more than the alarm change of 20 %.');
    expect(f!.explanation).toMatch(/\. It may point to .+; next: re-sample to confirm .+ask the lab/);
    expect(f!.basis).toBe('change');
  });

  it('judges oxidation as a rise over new oil, or as the reading itself without a new-oil value', () => {
    expect(judge({ oxidation: 25 })).toEqual([]); // 10 + 20 = 30 caution
    expect(judge({ oxidation: 41 })).toEqual([['oxidation', 'alarm', 41, 40]]);
    expect(judge({ oxidation: 25 }, WITHOUT_NEW_OIL)).toEqual([['oxidation', 'caution', 25, 20]]);
    expect(judge({ nitration: 31 }, WITHOUT_NEW_OIL)).toEqual([['nitration', 'alarm', 31, 30]]);
  });

  it('stays silent on TBN, TAN and viscosity without a new-oil reference', () => {
    expect(judge({ tbn: 0.5, tan: 9, v40: 20, v100: 200 }, WITHOUT_NEW_OIL)).toEqual([]);
  });
});

describe('condition rule: contamination', () => {
  it('judges water, fuel and soot against their levels', () => {
    // Defaults: water 500/1000 ppm, fuel 2.5/5 %, soot 1.5/3 %.
    expect(judge({ water: 600, fuel: 3, soot: 3.5 })).toEqual([
      ['water', 'caution', 600, 500],
      ['fuel', 'caution', 3, 2.5],
      ['soot', 'alarm', 3.5, 3],
    ]);
    expect(judge({ water: '<100', fuel: 2.5 })).toEqual([]);
  });

  it('raises any glycol found, as a possible coolant leak to confirm', () => {
    expect(judge({ glycol: 0.05 })).toEqual([['glycol', 'alarm', 0.05, 0]]);
    expect(judge({ glycol: '>0.5' })).toEqual([['glycol', 'alarm', 0.5, 0]]);
    expect(judge({ glycol: '<0.1' })).toEqual([]);
    expect(judge({ glycol: 0 })).toEqual([]);
    expect(judge({ glycol: 0.05 }, settingsFrom('condition: { glycolSeverity: caution }'))).toEqual([['glycol', 'caution', 0.05, 0]]);
    const [f] = conditionFindings(ruleInput([sample(0, { readings: { glycol: 0.05 } })], WITH_NEW_OIL));
    expect(f!.explanation.slice(0, 'Glycol (coolant) 0.05 % found.'.length)).toBe('Glycol (coolant) 0.05 % found.');
    expect(f!.explanation).toMatch(/\. It may point to .+; next: re-sample to confirm .+ask the lab/);
  });

  it('fires at every sample that shows it', () => {
    const samples = [sample(0, { sampleId: 'A', readings: { water: 1200 } }), sample(1, { sampleId: 'B', readings: { water: 200 } }), sample(2, { sampleId: 'C', readings: { water: 700 } })];
    expect(conditionFindings(ruleInput(samples, WITH_NEW_OIL)).map((f) => [f.sampleId, f.severity])).toEqual([
      ['A', 'alarm'],
      ['C', 'caution'],
    ]);
  });
});
