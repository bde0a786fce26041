import { describe, expect, it } from 'vitest';
import type { GroupStats } from '../../src/analysis/model.ts';
import { populationBands, populationMeasurands } from '../../src/analysis/populationStats.ts';
import { populationFindings, populationLimitStatus } from '../../src/analysis/rules/population.ts';
import type { Sample } from '../../src/domain/event.ts';
import type { ComponentSettings } from '../../src/domain/settings.ts';
import { ruleInput, sample, settingsFrom } from './history-fixtures.ts';

const SIGMA = settingsFrom('');
const PERCENTILE = settingsFrom('population:\n  method: percentile\n');

/** `n` results of other pumps in the 250–500 h band; `fe(i)` gives the i-th reading. */
function groupOf(settings: ComponentSettings, n: number, fe: (i: number) => number): GroupStats {
  const members = Array.from({ length: n }, (_, i) => sample(i, { sampleId: `G-${i}`, unit: `P${i}`, oilHours: 300, readings: { Fe: fe(i) } }));
  return {
    group: settings.group,
    bands: populationBands(members, settings.population, populationMeasurands(settings.population)),
    baselines: {},
  };
}

const own = (day: number, oilHours: number, fe: number | string): Sample =>
  sample(100 + day, { sampleId: `OWN-${day}`, oilHours, readings: { Fe: fe } });

describe('population rule, sigma method', () => {
  // Common practice: mean + 1σ (caution) and mean + 2σ (alarm) of like-for-like results.
  // 15 × 10 ppm and 15 × 20 ppm: mean 15, sd sqrt(750/29) = 5.0855 → caution 20.09 ppm, alarm 25.17 ppm.
  const group = groupOf(SIGMA, 30, (i) => (i < 15 ? 10 : 20));
  const samples = [own(1, 300, 19), own(2, 320, 21), own(3, 340, 26), own(4, 360, '<30'), own(5, 380, '>26'), own(6, 100, 90)];
  const input = ruleInput(samples, SIGMA, group);
  const findings = populationFindings(input);

  it('fires at the samples above the limits of their oil-hours band', () => {
    expect(findings.map((f) => [f.sampleId, f.severity, f.value])).toEqual([
      ['OWN-2', 'caution', 21],
      ['OWN-3', 'alarm', 26],
      ['OWN-5', 'alarm', 26],
    ]);
    expect(findings[0]!.threshold).toBeCloseTo(15 + Math.sqrt(750 / 29), 10);
    expect(findings[1]!.threshold).toBeCloseTo(15 + 2 * Math.sqrt(750 / 29), 10);
  });

  it('explains the level and where it comes from', () => {
    expect(findings[0]!.explanation.slice(0, 'Fe 21 ppm at 320 oil hours is above the population caution level of 20.1 ppm (mean 15 ppm + 1σ of 30 results in the 250–500 h band of group pump-gearboxes): higher than most like-for-like components at this point of the charge.'.length)).toBe('Fe 21 ppm at 320 oil hours is above the population caution level of 20.1 ppm (mean 15 ppm + 1σ of 30 results in the 250–500 h band of group pump-gearboxes): higher than most like-for-like components at this point of the charge.');
    expect(findings[0]!.explanation).toMatch(/\. It may point to .+; next: re-sample to confirm .+ask the lab/);
  });

  it('reports the limits of a band with enough data', () => {
    const status = populationLimitStatus(input, 'Fe', samples[0]!);
    expect(status.kind).toBe('limits');
    if (status.kind !== 'limits') return;
    expect(status.n).toBe(30);
    expect(status.caution).toBeCloseTo(20.0855, 4);
    expect(status.alarm).toBeCloseTo(25.171, 3);
  });

  it('says "not enough data" for a band below 30 results, and raises nothing there', () => {
    // Common practice: about 30 results before a distribution-based limit is trusted.
    expect(populationLimitStatus(input, 'Fe', samples[5]!)).toEqual({ kind: 'not-enough-data', n: 0, needed: 30 });
    const thin = ruleInput(samples, SIGMA, groupOf(SIGMA, 29, (i) => (i < 15 ? 10 : 20)));
    expect(populationLimitStatus(thin, 'Fe', samples[2]!)).toEqual({ kind: 'not-enough-data', n: 29, needed: 30 });
    expect(populationFindings(thin)).toEqual([]);
  });

  it('says "not enough data" without group statistics or oil hours', () => {
    expect(populationLimitStatus(ruleInput(samples, SIGMA), 'Fe', samples[0]!)).toEqual({ kind: 'not-enough-data', n: 0, needed: 30 });
    const noHours = sample(200, { readings: { Fe: 99 } });
    expect(populationLimitStatus(ruleInput([noHours], SIGMA, group), 'Fe', noHours)).toMatchObject({ kind: 'not-enough-data', n: 0 });
    expect(populationFindings(ruleInput([noHours], SIGMA, group))).toEqual([]);
  });

  it('honours configured sigma multipliers and minimum results', () => {
    const strict = settingsFrom('population:\n  minResults: 10\n  sigma: { caution: 0.5, alarm: 1 }\n');
    const small = groupOf(strict, 10, (i) => (i < 5 ? 10 : 20)); // mean 15, sd sqrt(250/9) = 5.27
    const got = populationFindings(ruleInput([own(1, 300, 18), own(2, 300, 21)], strict, small));
    expect(got.map((f) => f.severity)).toEqual(['caution', 'alarm']);
  });
});

describe('population rule, percentile method', () => {
  // Results 1..30 ppm. Definition 7 of Hyndman & Fan (1996): 90th percentile h = 29 · 0.9 = 26.1 → 27.1 ppm;
  // 97.5th: h = 28.275 → 29.275 ppm.
  const group = groupOf(PERCENTILE, 30, (i) => i + 1);
  const samples = [own(1, 300, 27), own(2, 300, 28), own(3, 300, 29.5)];
  const input = ruleInput(samples, PERCENTILE, group);

  it('takes its limits from the band values', () => {
    const status = populationLimitStatus(input, 'Fe', samples[0]!);
    expect(status).toMatchObject({ kind: 'limits', n: 30 });
    if (status.kind !== 'limits') return;
    expect(status.caution).toBeCloseTo(27.1, 10);
    expect(status.alarm).toBeCloseTo(29.275, 10);
  });

  it('fires above the percentiles', () => {
    const findings = populationFindings(input);
    expect(findings.map((f) => [f.sampleId, f.severity])).toEqual([
      ['OWN-2', 'caution'],
      ['OWN-3', 'alarm'],
    ]);
    expect(findings[0]!.explanation).toContain('90th percentile of 30 results in the 250–500 h band');
  });

  it('cannot use statistics built without band values', () => {
    const sigmaStats = groupOf(SIGMA, 30, (i) => i + 1);
    expect(populationLimitStatus(ruleInput(samples, PERCENTILE, sigmaStats), 'Fe', samples[0]!)).toEqual({
      kind: 'not-enough-data',
      n: 0,
      needed: 30,
    });
  });
});
