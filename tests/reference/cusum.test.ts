import { describe, expect, it } from 'vitest';
import { cusumChart, cusumStart, cusumStep } from '../../src/analysis/cusum.ts';

// Montgomery, Introduction to Statistical Quality Control, tabular CUSUM example (Tables 9.1 and 9.2): target 10, σ = 1,
// k = 0.5, h = 5; 20 points from N(10, 1) then 10 from N(11, 1). Data and sums from memory.
const DATA = [9.45, 7.99, 9.29, 11.66, 12.16, 10.18, 8.04, 11.46, 9.2, 10.34, 9.03, 11.47, 10.51, 9.4, 10.08, 9.37, 10.62, 10.31, 8.52, 10.84, 10.9, 9.33, 12.29, 11.5, 10.6, 11.08, 10.38, 11.62, 11.31, 10.52];
const UPPER = [0, 0, 0, 1.16, 2.82, 2.5, 0.04, 1.0, 0, 0, 0, 0.97, 0.98, 0, 0, 0, 0.12, 0, 0, 0.34, 0.74, 0, 1.79, 2.79, 2.89, 3.47, 3.35, 4.47, 5.28, 5.3];
const LOWER = [0.05, 1.56, 1.77, 0, 0, 0, 1.46, 0, 0.3, 0, 0.47, 0, 0, 0.1, 0, 0.13, 0, 0, 0.98, 0, 0, 0.17, 0, 0, 0, 0, 0, 0, 0, 0];

describe('tabular CUSUM against the Montgomery example (from memory)', () => {
  const points = cusumChart(DATA, 10, 1, { k: 0.5, h: 5 });

  it('reproduces both sums at every point', () => {
    points.forEach((p, i) => {
      expect(p.index).toBe(i + 1);
      expect(p.value).toBe(DATA[i]);
      expect(p.upper).toBeCloseTo(UPPER[i]!, 9);
      expect(p.lower).toBeCloseTo(LOWER[i]!, 9);
    });
  });

  it('first signals upward at point 29, where C+ = 5.28 > h, and keeps signalling (no reset)', () => {
    expect(points.findIndex((p) => p.signal !== null)).toBe(28);
    expect(points.slice(28).map((p) => p.signal)).toEqual(['up', 'up']);
    expect(points.slice(0, 28).every((p) => p.signal === null)).toBe(true);
  });

  it('works in sigma units: scaling the data and sigma together changes nothing', () => {
    const scaled = cusumChart(DATA.map((x) => 3 * x - 7), 3 * 10 - 7, 3, { k: 0.5, h: 5 });
    scaled.forEach((p, i) => {
      expect(p.upper).toBeCloseTo(points[i]!.upper, 9);
      expect(p.lower).toBeCloseTo(points[i]!.lower, 9);
      expect(p.signal).toBe(points[i]!.signal);
    });
  });
});

describe('CUSUM steps', () => {
  it('starts both sums at the headstart (Lucas & Crosier 1982: F·h) and signals only beyond h', () => {
    const p = { k: 0.5, h: 4, headstart: 0.5 };
    expect(cusumStart(p)).toEqual({ upper: 2, lower: 2 });
    expect(cusumStart({ k: 0.5, h: 4 })).toEqual({ upper: 0, lower: 0 });
    // Exactly h is not a signal; just past it is.
    expect(cusumStep({ upper: 2, lower: 0 }, 2.5, p)).toEqual({ upper: 4, lower: 0, signal: null });
    expect(cusumStep({ upper: 2, lower: 0 }, 2.6, p).signal).toBe('up');
    expect(cusumStep({ upper: 0, lower: 3 }, -1.6, p)).toMatchObject({ upper: 0, signal: 'down' });
  });

  it('rejects parameters outside their ranges', () => {
    expect(() => cusumChart([1], 0, 0, { k: 0.5, h: 4 })).toThrow(/sigma/);
    expect(() => cusumChart([1], 0, 1, { k: -1, h: 4 })).toThrow(/k/);
    expect(() => cusumChart([1], 0, 1, { k: 0.5, h: 4, headstart: 1 })).toThrow(/headstart/);
  });
});
