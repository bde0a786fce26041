import { describe, expect, it } from 'vitest';
import { ewmaChart, ewmaLimitFactor } from '../../src/analysis/ewma.ts';

// NIST/SEMATECH e-Handbook of Statistical Methods, section 6.3.2.4 (EWMA control charts), worked example:
// target 50, s = 2.0539, λ = 0.3, L = 3.
const NIST_DATA = [52.0, 47.0, 53.0, 49.3, 50.1, 47.0, 51.0, 50.1, 51.2, 50.5, 49.6, 47.6, 49.9, 51.3, 47.8, 51.2, 52.6, 52.4, 53.6, 52.1];
const NIST_EWMA = [50.6, 49.52, 50.56, 50.18, 50.16, 49.21, 49.75, 49.85, 50.26, 50.33, 50.11, 49.36, 49.52, 50.05, 49.38, 49.92, 50.73, 51.23, 51.94, 51.99];

describe('EWMA chart against the NIST/SEMATECH e-Handbook 6.3.2.4 example', () => {
  const steady = ewmaChart(NIST_DATA, 50, 2.0539, { lambda: 0.3, L: 3, exactLimits: false });

  it('reproduces every EWMA value the handbook prints (2 decimals)', () => {
    expect(steady.map((p) => p.index)).toEqual(NIST_DATA.map((_, i) => i + 1));
    steady.forEach((p, i) => expect(Math.abs(p.ewma - NIST_EWMA[i]!)).toBeLessThanOrEqual(0.005 + 1e-9));
  });

  it('has the handbook steady-state limits UCL 52.5884, LCL 47.4115', () => {
    // The handbook rounds sqrt(λ/(2−λ)) to 0.4201; the exact factor 0.420084 gives 52.58843 / 47.41157. Its printed UCL matches
    // the exact factor, its LCL the rounded one (47.41147), so both are checked to 1e-4.
    expect(ewmaLimitFactor(0.3, 1, false)).toBeCloseTo(0.4201, 4);
    for (const p of steady) {
      expect(Math.abs(p.ucl - 52.5884)).toBeLessThan(1e-4);
      expect(Math.abs(p.lcl - 47.4115)).toBeLessThan(1e-4);
    }
  });

  it('finds no signal, as the handbook concludes', () => {
    expect(steady.every((p) => p.signal === null)).toBe(true);
    expect(ewmaChart(NIST_DATA, 50, 2.0539, { lambda: 0.3, L: 3 }).every((p) => p.signal === null)).toBe(true);
  });

  it('uses exact time-varying limits by default, narrower at the start and reaching the steady state', () => {
    const exact = ewmaChart(NIST_DATA, 50, 2.0539, { lambda: 0.3, L: 3 });
    // First point: the EWMA's standard deviation is λ·s (the variance formula at i = 1), so the limits are 50 ± 3·0.3·2.0539.
    expect(exact[0]!.ucl).toBeCloseTo(50 + 3 * 0.3 * 2.0539, 10);
    expect(exact[0]!.ewma).toBe(steady[0]!.ewma);
    for (let i = 1; i < exact.length; i++) expect(exact[i]!.ucl).toBeGreaterThan(exact[i - 1]!.ucl);
    expect(exact.at(-1)!.ucl).toBeCloseTo(steady.at(-1)!.ucl, 5);
  });

  it('signals up and down, strictly outside the limits', () => {
    const points = ewmaChart([0, 10, -30], 0, 1, { lambda: 0.5, L: 3, exactLimits: false });
    // Steady half-width 3·sqrt(0.5/1.5) = 1.732: 0 inside, 5 above, −12.5 below.
    expect(points.map((p) => p.signal)).toEqual([null, 'up', 'down']);
    // λ = 1 is the Shewhart chart: limits ±3 exactly, so a value on the limit is not a signal and one just past it is.
    expect(ewmaChart([3, 3.000001, -3, -3.000001], 0, 1, { lambda: 1, L: 3 }).map((p) => p.signal)).toEqual([null, 'up', null, 'down']);
  });
});
