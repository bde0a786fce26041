/** Smoke test of the detection and scaling benchmarks on tiny sizes, so that the bench code does not rot. */
import { beforeAll, describe, expect, it } from 'vitest';
import { episodes, runDetection } from '../../bench/detection.ts';
import { runScaling } from '../../bench/scaling.ts';
import { growthExponent, median, percentile } from '../../bench/stats.ts';

describe('benchmark statistics', () => {
  it('nearest-rank percentiles, misses (Infinity) sorting last', () => {
    const xs = [7, 1, 10, 3, 2, 9, 4, 8, 6, 5];
    expect(median(xs)).toBe(5);
    expect(percentile(xs, 0.9)).toBe(9);
    expect(percentile(xs, 0.99)).toBe(10);
    expect(median([1, Infinity, Infinity])).toBe(Infinity);
    expect(Number.isNaN(median([]))).toBe(true);
  });

  it('growth exponent: 1 for linear, 2 for quadratic growth', () => {
    expect(growthExponent(10, 1, 1000, 100)).toBeCloseTo(1, 12);
    expect(growthExponent(10, 1, 100, 100)).toBeCloseTo(2, 12);
  });

  it('counts a run of firing samples once, and with a gap as one incident', () => {
    const fired = Uint8Array.from([0, 1, 1, 0, 1, 0, 0, 0, 0, 0, 0, 1, 1]);
    expect(episodes(fired, 0, fired.length - 1, 1)).toBe(3);
    // Two clean samples between the first runs: one incident when 5 clean samples are needed; six before the last.
    expect(episodes(fired, 0, fired.length - 1, 5)).toBe(2);
    // A run that started before the window does not count inside it.
    expect(episodes(fired, 2, fired.length - 1, 1)).toBe(2);
  });
});

interface DetectionJson {
  targetFalseAlarmsPer100ComponentYears: number;
  thresholds: Record<'alarms' | 'incidents', { populationSigmaMultiplier: number; achievedOnTuningFleet: Record<string, number> }>;
  falseAlarms: Record<string, { alarmsPer100ComponentYears: number }>;
  steps: { factor: number; family: string; detected: number; medianDelaySamples: number | null }[];
}

describe('detection benchmark on a tiny fleet', () => {
  let result: ReturnType<typeof runDetection>;
  let json: DetectionJson;
  beforeAll(() => {
    result = runDetection({ trainingComponents: 40, tuningComponents: 80, testComponents: 60, steppedComponents: 40, iterations: 8, seed: 3 });
    json = result.json as unknown as DetectionJson;
  });

  it('matches every family at or under the false-alarm target on the tuning fleet', () => {
    for (const counting of ['alarms', 'incidents'] as const) {
      for (const rate of Object.values(json.thresholds[counting].achievedOnTuningFleet)) {
        expect(rate).toBeLessThanOrEqual(json.targetFalseAlarmsPer100ComponentYears);
        expect(rate).toBeGreaterThan(0);
      }
    }
  });

  it('reports a row per family and step, and the detectors catch a tripled wear rate', () => {
    expect(result.table.rows).toHaveLength(3 * 11);
    for (const family of ['ewma, matched alarms', 'cusum, matched alarms']) {
      const row = json.steps.find((s) => s.factor === 3 && s.family === family)!;
      expect(row.detected).toBeGreaterThanOrEqual(0.9);
      expect(row.medianDelaySamples).toBeGreaterThanOrEqual(1);
    }
  });

  it('on a spread population the usual 2σ limit costs more false alarms than the budget allows', () => {
    expect(json.falseAlarms['population 2σ (site)']!.alarmsPer100ComponentYears).toBeGreaterThan(json.targetFalseAlarmsPer100ComponentYears);
    expect(json.thresholds.alarms.populationSigmaMultiplier).toBeGreaterThan(2);
  });
});

describe('scaling benchmark on short histories', () => {
  it('times every length and reports per-sample cost', () => {
    const r = runScaling({ lengths: [10, 40], histories: 1, batches: 2, batchMs: 1 });
    const lengths = (r.json as { lengths: { samples: number; usPerSample: number }[] }).lengths;
    expect(lengths.map((l) => l.samples)).toEqual([10, 40]);
    for (const l of lengths) expect(l.usPerSample).toBeGreaterThan(0);
  });
});
