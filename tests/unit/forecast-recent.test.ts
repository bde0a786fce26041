/**
 * The forecast's second account of the wear beside the filter's: the recent intervals' rate and its steady change
 * (src/analysis/forecast/forecastComponent.ts), weighed with the filter's trend in a mixture (crossing.ts). The
 * arithmetic of one trend is checked against outside references in tests/reference/forecast-interval.test.ts; here:
 * a mixture of one trend is that trend, a changing rate projects as its integral, and the weight follows the data.
 * Simulated data: the documented noise model (tests/helpers/wearFleet.ts).
 */
import { describe, expect, it } from 'vitest';
import { evaluateComponent } from '../../src/analysis/evaluate.ts';
import { crossingQuantile, firstReached, mixtureCrossing, mixtureLevelQuantiles, projectAt, trendAt, type ProjectedTrend } from '../../src/analysis/forecast/crossing.ts';
import { forecastComponent } from '../../src/analysis/forecast/forecastComponent.ts';
import { normalQuantile } from '../../src/analysis/forecast/quantile.ts';
import { parseConfig } from '../../src/domain/configFile.ts';
import { resolveSettings } from '../../src/domain/settings.ts';
import { simulatedSamples, steppedFe } from '../helpers/wearFleet.ts';

const TREND: ProjectedTrend = { level: 12, rate: 0.05, levelVariance: 1.5, covariance: 0.002, rateVariance: 4e-5, processVariance: 0.02, dilution: 5e-5, makeUpLevel: 0 };
const ABOVE = { levelAt: () => 40, side: 'above' as const, horizon: 2000 };

describe('forecast: mixture of trends', () => {
  it('a mixture of one trend, or of two copies of it, gives the single trend’s quantiles', () => {
    for (const p of [0.1, 0.5, 0.9]) {
      const single = crossingQuantile(TREND, { ...ABOVE, z: normalQuantile(p) })!;
      expect(mixtureCrossing([{ weight: 1, trend: TREND }], ABOVE).quantile(p)!).toBeCloseTo(single, 6);
      expect(mixtureCrossing([{ weight: 0.3, trend: TREND }, { weight: 0.7, trend: TREND }], ABOVE).quantile(p)!).toBeCloseTo(single, 6);
      // A search from a later start, or bounded below the horizon, finds the same crossing where it lies within.
      expect(mixtureCrossing([{ weight: 1, trend: TREND }], ABOVE).quantile(p, single / 2, single + 1)!).toBeCloseTo(single, 6);
      expect(mixtureCrossing([{ weight: 1, trend: TREND }], ABOVE).quantile(p, 0, single / 2)).toBeUndefined();
      const x = projectAt(TREND, 300);
      expect(mixtureLevelQuantiles([{ weight: 1, trend: TREND }], 300, [p])[0]).toBeCloseTo(x.mean + normalQuantile(p) * x.sd, 6);
    }
  });

  it('lies between its trends: a faster trend beside a slower one moves every percentile earlier', () => {
    const fast: ProjectedTrend = { ...TREND, rate: 0.1 };
    for (const p of [0.1, 0.5, 0.9]) {
      const slow = mixtureCrossing([{ weight: 1, trend: TREND }], ABOVE).quantile(p)!;
      const quick = mixtureCrossing([{ weight: 1, trend: fast }], ABOVE).quantile(p)!;
      const both = mixtureCrossing([{ weight: 0.5, trend: TREND }, { weight: 0.5, trend: fast }], ABOVE).quantile(p)!;
      expect(both).toBeGreaterThanOrEqual(quick - 1e-6);
      expect(both).toBeLessThanOrEqual(slow + 1e-6);
    }
  });
});

describe('forecast: a rate that changes steadily', () => {
  const accelerating: ProjectedTrend = { ...TREND, acceleration: { value: 2e-5, variance: 1e-11, rateCovariance: -1e-8 } };

  it('projects the integral of the rate: level + g·τ + c·τ²/2 without make-up oil, with its variance', () => {
    const t: ProjectedTrend = { ...accelerating, dilution: 0 };
    const tau = 400;
    const x = projectAt(t, tau);
    expect(x.mean).toBeCloseTo(12 + 0.05 * tau + (2e-5 * tau * tau) / 2, 9);
    const variance = 1.5 + 2 * tau * 0.002 + tau * tau * 4e-5 + 0.02 * tau + ((tau * tau) / 2) ** 2 * 1e-11 + 2 * tau * ((tau * tau) / 2) * -1e-8;
    expect(x.sd ** 2).toBeCloseTo(variance, 9);
  });

  it('make-up oil: tends to the undiluted projection as the dilution vanishes', () => {
    const a = projectAt({ ...accelerating, dilution: 1e-8 }, 500);
    const b = projectAt({ ...accelerating, dilution: 0 }, 500);
    expect(a.mean).toBeCloseTo(b.mean, 3);
    expect(a.sd).toBeCloseTo(b.sd, 3);
  });

  it('moving the trend on and projecting the rest gives the mean of projecting at once', () => {
    for (const dilution of [0, 5e-5]) {
      const t = { ...accelerating, dilution };
      expect(projectAt(trendAt(t, 250), 350).mean).toBeCloseTo(projectAt(t, 600).mean, 9);
    }
  });
});

const CONFIG = parseConfig(`
detection:
  measurands: [Fe]
  labNoise: { absolute: 1, relative: 0.05 }
  runningInHours: 0
  budget: { sampleIntervalHours: 120 }
groups:
  - name: sim-gearboxes
    sumpLitres: 200
    residualFraction: 0.1
    chargeHours: 1000
    limits: { Fe: { caution: 40, alarm: 60 } }
`);

describe('forecast: the recent intervals beside the filter', () => {
  /** The recent trend's weight and the forecast's method at every sample from the 10th on. */
  function weights(seed: number, metals?: ReturnType<typeof steppedFe>): { unitHours: number; weight: number; method: string }[] {
    const samples = simulatedSamples({ samples: 40, intervalHours: 120, ...(metals && { metals }) }, seed);
    const settings = resolveSettings(CONFIG, samples[0]!);
    const out: { unitHours: number; weight: number; method: string }[] = [];
    for (let n = 10; n <= samples.length; n++) {
      const f = forecastComponent(evaluateComponent(samples.slice(0, n), settings).state, settings, undefined, { measurands: ['Fe'], gates: false });
      const basis = f.measurands[0]?.basis;
      if (basis?.recent !== undefined) out.push({ unitHours: samples[n - 1]!.unitHours!, weight: basis.recent.weight, method: basis.method });
    }
    return out;
  }
  const mean = (xs: number[]) => xs.reduce((a, b) => a + b, 0) / xs.length;

  it('without the projection (as an incident step asks) gives the same limits and no projection points', () => {
    const samples = simulatedSamples({ samples: 40, intervalHours: 120, metals: steppedFe(2400, 3) }, 34);
    const settings = resolveSettings(CONFIG, samples[0]!);
    let mixed = 0;
    for (let n = 10; n <= samples.length; n += 3) {
      const state = evaluateComponent(samples.slice(0, n), settings).state;
      const whole = forecastComponent(state, settings, undefined, { measurands: ['Fe'] });
      const lean = forecastComponent(state, settings, undefined, { measurands: ['Fe'], projection: false });
      const { projection, ...rest } = whole.measurands[0]!;
      expect(lean.measurands[0]).toEqual({ ...rest, projection: [] });
      if (rest.status === 'forecast') expect(projection.length).toBeGreaterThan(0);
      if (whole.measurands[0]!.basis?.recent !== undefined) mixed += 1;
    }
    // Some of these forecasts weigh two trends (the projection's quantiles by Newton's method), some one.
    expect(mixed).toBeGreaterThan(0);
  });

  it('weighs little on steady wear, and most within the first thousand hours after the rate has tripled', () => {
    for (const seed of [31, 32, 33]) {
      const steady = weights(seed);
      expect(steady.length).toBeGreaterThan(20);
      expect(mean(steady.map((w) => w.weight))).toBeLessThan(0.35);
      const changed = weights(seed, steppedFe(2400, 3)).filter((w) => w.unitHours > 2400 && w.unitHours < 3600);
      expect(Math.max(...changed.map((w) => w.weight))).toBeGreaterThan(0.6);
    }
  });
});

describe('forecast: the root search within a grid step (crossing.ts firstReached)', () => {
  const counted = (f: (x: number) => number) => {
    let calls = 0;
    return { f: (x: number) => (calls++, f(x)), calls: () => calls };
  };

  it('finds a smooth crossing to within 1e-8 h in far fewer evaluations than the 40 bisections it replaces', () => {
    // The crossing of x(τ) = 12 + 0.05τ + 2e-5τ² with 40: τ = (−0.05 + √(0.0025 + 4·2e-5·28)) / (2·2e-5) (the quadratic formula).
    const exact = (-0.05 + Math.sqrt(0.0025 + 4 * 2e-5 * 28)) / (2 * 2e-5);
    const c = counted((tau) => 12 + 0.05 * tau + 2e-5 * tau * tau - 40);
    const lo = Math.floor(exact / 10) * 10;
    const got = firstReached(c.f, lo, c.f(lo), lo + 10, c.f(lo + 10));
    expect(Math.abs(got - exact)).toBeLessThan(1e-8);
    expect(got).toBeGreaterThanOrEqual(exact - 1e-12);
    // 2 for the bracket's ends, 6 by the search here.
    expect(c.calls()).toBeLessThan(15);
  });

  it('finds a step (a population band’s edge) as bisection does, and never returns a point short of the crossing', () => {
    const edge = 123.456789;
    const c = counted((tau) => (tau >= edge ? 0.3 : -0.7));
    const got = firstReached(c.f, 100, -0.7, 200, 0.3);
    expect(got).toBeGreaterThanOrEqual(edge);
    expect(got - edge).toBeLessThan(1e-8);
    // −∞ where no level applies: the search bisects there.
    const gap = firstReached((tau) => (tau < 150 ? -Infinity : tau - 170), 100, -Infinity, 200, 30);
    expect(gap).toBeCloseTo(170, 7);
  });
});
