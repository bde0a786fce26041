/**
 * The interval arithmetic of the time-to-limit forecast (src/analysis/forecast/crossing.ts, quantile.ts) checked
 * against general-purpose statistics libraries from the npm registry:
 * - jStat 1.9.6 (`jstat`, jStat.normal.inv / cdf, jStat.studentt.inv) and simple-statistics 7 (`probit`,
 *   `linearRegression`) for the quantiles and the straight-line fit;
 * - the closed forms of a linear trend's crossing time, which follow from those quantiles: with the level's
 *   variance only, T_p = (L − x₀ + z_p·sd)/g; with the rate's variance only, T_p = (L − x₀)/(g − z_p·sd_g), the
 *   p-quantile of a time that is a decreasing function of the rate;
 * - the textbook standard errors of a fitted line's mean response (Draper & Smith, Applied Regression Analysis,
 *   3rd ed., section 3.1, from memory): Var(ŷ(t)) = s²(1/n + (t − t̄)²/Sxx), Var(b) = s²/Sxx.
 */
import { jStat } from 'jstat';
import { linearRegression, probit } from 'simple-statistics';
import { describe, expect, it } from 'vitest';
import { crossingQuantile, projectAt, type ProjectedTrend } from '../../src/analysis/forecast/crossing.ts';
import { normalQuantile, quantileFunction } from '../../src/analysis/forecast/quantile.ts';

const flat = (t: Partial<ProjectedTrend>): ProjectedTrend => ({
  level: 10,
  rate: 0.05,
  levelVariance: 0,
  covariance: 0,
  rateVariance: 0,
  processVariance: 0,
  dilution: 0,
  makeUpLevel: 0,
  ...t,
});

describe('normal quantile', () => {
  it.each([0.001, 0.01, 0.025, 0.1, 0.3, 0.5, 0.7, 0.9, 0.975, 0.999])('Φ⁻¹(%f) agrees with jStat.normal.inv to 1e-9 and with simple-statistics probit', (p) => {
    expect(normalQuantile(p)).toBeCloseTo(jStat.normal.inv(p, 0, 1), 9);
    // simple-statistics' probit comes from an approximation of the inverse error function: good to about 0.01 in the
    // far tails, 1e-3 between the 10th and 90th percentiles.
    expect(Math.abs(normalQuantile(p) - probit(p))).toBeLessThan(p >= 0.1 && p <= 0.9 ? 1e-3 : 0.012);
  });

  it('the 10th and 90th percentiles are ∓1.2816 (NIST/SEMATECH e-Handbook 1.3.6.7.1, normal critical values)', () => {
    expect(normalQuantile(0.9)).toBeCloseTo(1.2816, 4);
    expect(normalQuantile(0.1)).toBeCloseTo(-1.2816, 4);
  });

  it('Student t quantiles agree with jStat.studentt.inv within 1 % (Cornish–Fisher, 3 or more degrees of freedom)', () => {
    for (const df of [3, 5, 10, 30]) {
      for (const p of [0.1, 0.9, 0.95]) expect(Math.abs(quantileFunction(df)(p) / jStat.studentt.inv(p, df) - 1)).toBeLessThan(0.01);
    }
  });
});

describe('crossing time of a linear trend with known variance', () => {
  const L = 30;
  const horizon = 5000;
  const z = (p: number) => jStat.normal.inv(p, 0, 1);

  it('level uncertainty only: T_p = (L − x₀ + z_p·sd)/g', () => {
    const sd = 2;
    const t = flat({ levelVariance: sd * sd });
    for (const p of [0.1, 0.5, 0.9]) {
      const got = crossingQuantile(t, { levelAt: () => L, side: 'above', horizon, z: normalQuantile(p) })!;
      expect(got).toBeCloseTo((L - t.level + z(p) * sd) / t.rate, 4);
    }
  });

  it('rate uncertainty only: T_p = (L − x₀)/(g − z_p·sd_g)', () => {
    const sdRate = 0.01;
    const t = flat({ rateVariance: sdRate ** 2 });
    for (const p of [0.1, 0.5, 0.9]) {
      const got = crossingQuantile(t, { levelAt: () => L, side: 'above', horizon, z: normalQuantile(p) })!;
      expect(got).toBeCloseTo((L - t.level) / (t.rate - z(p) * sdRate), 3);
    }
  });

  it('with level, rate, covariance and process variance: P(x(T_p) ≥ L) = p by jStat.normal.cdf', () => {
    const t = flat({ levelVariance: 1.5, rateVariance: 1e-5, covariance: -2e-3, processVariance: 0.02 });
    for (const p of [0.1, 0.5, 0.9]) {
      const tau = crossingQuantile(t, { levelAt: () => L, side: 'above', horizon, z: normalQuantile(p) })!;
      const { mean, sd } = projectAt(t, tau);
      // The variance a library would compute from the same parts: Var(x₀ + g·τ) + q·τ.
      expect(sd ** 2).toBeCloseTo(1.5 + tau * tau * 1e-5 + 2 * tau * -2e-3 + 0.02 * tau, 6);
      expect(1 - jStat.normal.cdf(L, mean, sd)).toBeCloseTo(p, 6);
    }
  });

  it('a falling quantity (TBN towards a lower level) mirrors a rising one', () => {
    const rising = flat({ level: 4, rate: 0.004, levelVariance: 0.04, rateVariance: 1e-7 });
    const falling = flat({ level: -4, rate: -0.004, levelVariance: 0.04, rateVariance: 1e-7 });
    for (const p of [0.1, 0.5, 0.9]) {
      const up = crossingQuantile(rising, { levelAt: () => 6, side: 'above', horizon, z: normalQuantile(p) });
      const down = crossingQuantile(falling, { levelAt: () => -6, side: 'below', horizon, z: normalQuantile(p) });
      expect(down).toBeCloseTo(up!, 6);
    }
  });

  it('make-up oil: the mean follows dx/dτ = g − κx, as the exact solution gives', () => {
    const t = flat({ dilution: 1e-3, rate: 0.05, level: 10 });
    const tau = 400;
    const exact = 10 * Math.exp(-1e-3 * tau) + (0.05 / 1e-3) * (1 - Math.exp(-1e-3 * tau));
    expect(projectAt(t, tau).mean).toBeCloseTo(exact, 9);
  });
});

describe('straight-line fit of a measurand the filter does not watch', async () => {
  const { advanceForecast } = await import('../../src/analysis/forecast/forecastTrack.ts');
  const { forecastComponent } = await import('../../src/analysis/forecast/forecastComponent.ts');
  const { parseConfig } = await import('../../src/domain/configFile.ts');
  const { resolveSettings } = await import('../../src/domain/settings.ts');
  const { parseResultEvent } = await import('../../src/domain/event.ts');

  it('level, rate and their standard errors are those of the least-squares line (simple-statistics, Draper & Smith)', () => {
    const settings = resolveSettings(parseConfig('defaults:\n  newOil: { tbn: 10 }\n'), { unit: 'U', component: 'engine' });
    const hours = [50, 150, 260, 340, 455, 560];
    const tbn = [9.6, 9.1, 8.4, 8.3, 7.5, 7.2];
    let track;
    for (let i = 0; i < hours.length; i++) {
      const parsed = parseResultEvent({ sampleId: `S${i}`, unit: 'U', component: 'engine', sampledAt: new Date(Date.UTC(2026, 0, 1 + i * 5)).toISOString(), unitHours: 1000 + hours[i]!, oilHours: hours[i], readings: { tbn: tbn[i] } });
      if (!parsed.ok) throw new Error('invalid');
      track = advanceForecast(track, { sample: parsed.sample, chargeIndex: 0, newCharge: false, settings, intervals: new Map(), points: [], change: {}, trendMeasurands: ['tbn'], usageSamples: 6 });
    }
    const state = { unit: 'U', component: 'engine', samples: 6, wear: {}, change: {}, sampling: {} as never, charge: { index: 0, startedBy: 'first' as const, freshOil: false, lastOilHours: 560 }, last: { sampleId: 'S5', time: Date.UTC(2026, 0, 26) }, forecast: track! };
    const f = forecastComponent(state, settings, undefined, { measurands: ['tbn'] });
    const basis = f.measurands[0]!.basis!;
    const fit = linearRegression(hours.map((h, i) => [h, tbn[i]!]));
    expect(basis.method).toBe('trend');
    expect(basis.rate).toBeCloseTo(fit.m, 10);
    expect(basis.level).toBeCloseTo(fit.b + fit.m * 560, 8);
    const n = hours.length;
    const tBar = hours.reduce((a, b) => a + b) / n;
    const sxx = hours.reduce((a, h) => a + (h - tBar) ** 2, 0);
    const s2 = hours.reduce((a, h, i) => a + (tbn[i]! - (fit.b + fit.m * h)) ** 2, 0) / (n - 2);
    expect(basis.rateSd).toBeCloseTo(Math.sqrt(s2 / sxx), 10);
    expect(basis.levelSd).toBeCloseTo(Math.sqrt(s2 * (1 / n + (560 - tBar) ** 2 / sxx)), 10);
    // The alarm is TBN at half of new (common practice): 5 mg KOH/g; the central crossing is where the line reaches it.
    const alarm = f.measurands[0]!.limits.find((l) => l.severity === 'alarm')!;
    expect(alarm.side).toBe('below');
    expect(alarm.level).toBe(5);
    expect(alarm.outcome).toBe('crossing');
    // With an oil change planned at 700 oil hours the line does not get there first: new oil restores TBN.
    const planned = forecastComponent(state, { ...settings, chargeHours: 700 }, undefined, { measurands: ['tbn'] });
    const before = planned.measurands[0]!.limits.find((l) => l.severity === 'alarm')!;
    expect(before.outcome).toBe('after-oil-change');
    expect(before.text).toContain('before the next oil change (planned at 700 oil hours)');
    const noHorizon = forecastComponent(state, { ...settings, forecast: { ...settings.forecast!, horizonHours: 5000 } }, undefined, { measurands: ['tbn'] });
    const central = noHorizon.measurands[0]!.limits.find((l) => l.severity === 'alarm')!.central!;
    expect(central.oilHours).toBeCloseTo((5 - fit.b) / fit.m, 3);
    // The 10th percentile of the crossing: the line's one-sided t band (n − 2 = 4 df, jStat) reaches 5 there.
    const early = noHorizon.measurands[0]!.limits.find((l) => l.severity === 'alarm')!.early!;
    const tau = early.oilHours - 560;
    const meanAt = basis.level + basis.rate * tau;
    const sdAt = Math.sqrt(s2 * (1 / n + (early.oilHours - tBar) ** 2 / sxx));
    expect(Math.abs((5 - meanAt) / sdAt - quantileFunction(4)(0.1))).toBeLessThan(1e-6);
    expect(Math.abs(quantileFunction(4)(0.1) / jStat.studentt.inv(0.1, 4) - 1)).toBeLessThan(0.01);
  });
});
