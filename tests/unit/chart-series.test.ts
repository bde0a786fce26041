import { describe, expect, it } from 'vitest';
import { evaluateComponent } from '../../src/analysis/evaluate.ts';
import type { GroupStats } from '../../src/analysis/model.ts';
import { buildComponentSeries } from '../../src/charts/componentSeries.ts';
import { parseConfig } from '../../src/domain/configFile.ts';
import { resolveSettings } from '../../src/domain/settings.ts';
import { IN_CONTROL, SIM_CONFIG, simulatedSamples, steppedFe } from '../helpers/wearFleet.ts';
import { fixtureSeries } from './chart-fixtures.ts';

describe('component series: readings, rates, limits and marks', () => {
  const { series, findings } = fixtureSeries();
  const fe = series.measurands.find((m) => m.measurand === 'Fe')!;
  const si = series.measurands.find((m) => m.measurand === 'Si')!;

  it('splits the readings by oil charge, detection measurands first', () => {
    expect(series.measurands.map((m) => m.measurand)).toEqual(['Fe', 'Si']);
    expect(series).toMatchObject({ unit: 'PS2-P3', component: 'gearbox', group: 'pump-gearboxes', samples: 8, charges: 2 });
    expect(fe.charges.map((c) => [c.index, c.startedBy, c.points.map((p) => p.value)])).toEqual([
      [0, 'first', [5, 10, 15, 20]],
      [1, 'oilChanged', [8, 30, 44, 70]],
    ]);
    expect(fe.charges[1]!.points[0]).toMatchObject({ oilHours: 250, censored: false, text: '8' });
  });

  it('keeps a censored reading as its bound, flagged, with the text the lab gave', () => {
    expect(si.charges[0]!.points[1]).toMatchObject({ value: 1, censored: true, text: '<1' });
    expect(si.rates).toBeNull(); // a contaminant has no wear rate
    expect(si.cusum).toBeNull();
    expect(si.population).toBeNull(); // population limits configured for Fe only
  });

  it('gives the wear rate per interval as rise over run, per 100 h, with residual oil after the drain', () => {
    // Common practice: rate = ppm gained / operating hours on the same charge. First sample after the drain:
    // 10 % of the old charge's 20 ppm stays, so (8 − 0.1·20) ppm over 250 h = 2.4 ppm/100 h.
    expect(fe.rates!.points.map((p) => Number(p.per100h.toFixed(9)))).toEqual([2, 2, 2, 2.4, 8.8, 5.6, 10.4]);
    expect(fe.rates!.points[3]).toMatchObject({ chargeIndex: 1, firstOfCharge: true, hours: 250 });
    expect(fe.rates!.limits).toEqual({ caution: 6, alarm: 12 });
    expect(fe.limits).toEqual({ caution: 40, alarm: 60 });
  });

  it('gives the population limits of the band of each reading, or "not enough data"', () => {
    // mean + 1σ and mean + 2σ (common practice): 4 + 1.5 = 5.5 and 4 + 3 = 7; the 500 h band has 12 of 30 results.
    const at = (day: string) => fe.population!.find((p) => p.sampleId === day)!.status;
    expect(at('S-0010')).toEqual({ kind: 'limits', caution: 5.5, alarm: 7, n: 40 });
    expect(at('S-0020')).toEqual({ kind: 'not-enough-data', n: 12, needed: 30 });
  });

  it('marks every finding of the measurand, on the panel of its rule', () => {
    const feFindings = findings.filter((f) => f.measurand === 'Fe');
    expect(fe.marks).toHaveLength(feFindings.length);
    expect(fe.marks.map((m) => [m.sampleId, m.rule, m.severity])).toEqual(feFindings.map((f) => [f.sampleId, f.rule, f.severity]));
    const fixed = fe.marks.filter((m) => ['limit', 'rate', 'population'].includes(m.rule)).map((m) => [m.sampleId, m.rule, m.severity, m.panel]);
    // Worked by hand from the fixture: 44 > 40 caution, 70 > 60 alarm; 8.8 and 10.4 ppm/100 h > 6; 8 ppm > 7 at 250 h.
    expect(fixed.sort()).toEqual(
      [
        ['S-0050', 'population', 'alarm', 'readings'],
        ['S-0060', 'rate', 'caution', 'rate'],
        ['S-0070', 'limit', 'caution', 'readings'],
        ['S-0080', 'limit', 'alarm', 'readings'],
        ['S-0080', 'rate', 'caution', 'rate'],
      ].sort(),
    );
    for (const m of fe.marks.filter((k) => k.rule === 'cusum' || k.rule === 'ewma')) expect(m.panel).toBe(m.rule);
  });
});

describe('component series: detector statistics', () => {
  const config = parseConfig(SIM_CONFIG);
  const settings = resolveSettings(config, { unit: 'SIM', component: 'gearbox', group: 'sim-gearboxes' });
  const group: GroupStats = { group: 'sim-gearboxes', bands: {}, baselines: { Fe: { ...IN_CONTROL.metals.Fe!, intervals: 10_000, components: 100 } } };
  const samples = simulatedSamples({ samples: 60, metals: steppedFe(7000, 3) }, 11);
  const evaluation = evaluateComponent(samples, settings, group);
  const fe = buildComponentSeries(evaluation, settings, group).measurands.find((m) => m.measurand === 'Fe')!;
  const findings = evaluation.steps.flatMap((s) => s.findings);

  it('follow the tabular CUSUM recursion C⁺ = max(0, C⁺ + z − k), C⁻ = max(0, C⁻ − z − k) from zero', () => {
    // NIST/SEMATECH e-Handbook of Statistical Methods, 6.3.2.3 (tabular CUSUM), with target 0 and sigma 1.
    const c = fe.cusum!;
    let upper = 0;
    let lower = 0;
    for (const p of c.points) {
      upper = Math.max(0, upper + p.z - c.k);
      lower = Math.max(0, lower - p.z - c.k);
      expect(p.upper).toBeCloseTo(upper, 12);
      expect(p.lower).toBeCloseTo(lower, 12);
    }
    expect(c.points.length).toBeGreaterThan(40);
  });

  it('follow the EWMA recursion with its exact limits ±L·sqrt(λ/(2−λ)·(1−(1−λ)^2i))', () => {
    // NIST/SEMATECH e-Handbook of Statistical Methods, 6.3.2.4 (EWMA control charts), with target 0 and sigma 1.
    const e = fe.ewma!;
    let w = 0;
    e.points.forEach((p, n) => {
      const i = n + 1;
      w = e.lambda * p.z + (1 - e.lambda) * w;
      expect(p.ewma).toBeCloseTo(w, 12);
      expect(p.ucl).toBeCloseTo(e.L * Math.sqrt((e.lambda / (2 - e.lambda)) * (1 - (1 - e.lambda) ** (2 * i))), 12);
      // The lower limit has the fall side's own width (its part of the budget: budget.ts changeDesign).
      expect(p.lcl).toBeCloseTo(-e.LFall * Math.sqrt((e.lambda / (2 - e.lambda)) * (1 - (1 - e.lambda) ** (2 * i))), 12);
    });
  });

  it('cross their limits exactly where the change rule raised its findings', () => {
    const cusumUp = fe.cusum!.points.filter((p) => p.upper > fe.cusum!.h).map((p) => p.sampleId);
    const cusumDown = fe.cusum!.points.filter((p) => p.lower > fe.cusum!.hFall).map((p) => p.sampleId);
    const ewmaUp = fe.ewma!.points.filter((p) => p.ewma > p.ucl).map((p) => p.sampleId);
    const ewmaDown = fe.ewma!.points.filter((p) => p.ewma < p.lcl).map((p) => p.sampleId);
    // An upward signal is a finding of the detector's family; a fall one of the sampling family (check rate-fall).
    const of = (rule: string, direction: string) =>
      findings.filter((f) => f.measurand === 'Fe' && f.direction === direction && (f.rule === rule || (f.rule === 'sampling' && f.basis === rule))).map((f) => f.sampleId);
    expect(cusumUp.length).toBeGreaterThan(0); // the tripled wear rate is detected
    expect(cusumUp).toEqual(of('cusum', 'up'));
    expect(cusumDown).toEqual(of('cusum', 'down'));
    expect(ewmaUp).toEqual(of('ewma', 'up'));
    expect(ewmaDown).toEqual(of('ewma', 'down'));
    const markedCusum = fe.marks.filter((m) => m.rule === 'cusum' || (m.rule === 'sampling' && m.panel === 'cusum')).length;
    expect(markedCusum).toBe(cusumUp.length + cusumDown.length);
  });
});
