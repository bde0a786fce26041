import { describe, expect, it } from 'vitest';
import { ewmaArl } from '../../src/analysis/arl/ewmaArl.ts';
import { ewmaChart, ewmaLimitFactor } from '../../src/analysis/ewma.ts';

function expectWithin(actual: number, expected: number, relative: number): void {
  expect(Math.abs(actual - expected) / expected, `${actual} vs ${expected}`).toBeLessThan(relative);
}

const SHIFTS = [0, 0.25, 0.5, 0.75, 1, 1.5, 2, 2.5, 3, 3.5, 4, 5];

describe('EWMA run lengths with steady-state limits', () => {
  it('match Lucas & Saccucci (1990), Technometrics 32(1): λ = 0.5, L = 3.071, every shift', () => {
    const table = [500, 255, 88.8, 35.9, 17.5, 6.53, 3.63, 2.5, 1.93, 1.58, 1.34, 1.07];
    SHIFTS.forEach((shift, i) => expectWithin(ewmaArl({ lambda: 0.5, L: 3.071, shift, sided: 'two' }), table[i]!, 0.01));
  });

  it('match Lucas & Saccucci (1990): λ = 0.03, L = 2.437, every shift', () => {
    const table = [500, 76.7, 29.3, 17.6, 12.6, 8.07, 5.99, 4.8, 4.03, 3.49, 3.11, 2.55];
    SHIFTS.forEach((shift, i) => expectWithin(ewmaArl({ lambda: 0.03, L: 2.437, shift, sided: 'two' }), table[i]!, 0.01));
  });

  it('match the SAS/QC EWMAARL function documentation to its printed digits: λ = 0.25, L = 3, 1σ → 11.154267016', () => {
    expectWithin(ewmaArl({ lambda: 0.25, L: 3, shift: 1, sided: 'two' }), 11.154267016, 1e-9);
  });

  it('reduce to the Shewhart chart at λ = 1: ARL = 1/P(outside ±L)', () => {
    // Common practice: an individuals chart signals with probability 2·(1 − Φ(3)) = 0.0026998 per point at 3σ.
    expectWithin(ewmaArl({ lambda: 1, L: 3, shift: 0, sided: 'two' }), 1 / 0.0026997960632601866, 1e-9);
    expectWithin(ewmaArl({ lambda: 1, L: 3, shift: 0, sided: 'one' }), 1 / 0.0013498980316300933, 1e-9);
  });
});

function normalDraws(seed: number): () => number {
  let a = seed >>> 0;
  const u = () => {
    a = (a + 0x6d2b79f5) >>> 0;
    let t = a;
    t = Math.imul(t ^ (t >>> 15), t | 1);
    t ^= t + Math.imul(t ^ (t >>> 7), t | 61);
    return ((t ^ (t >>> 14)) >>> 0) / 4294967296;
  };
  return () => Math.sqrt(-2 * Math.log(1 - u())) * Math.cos(2 * Math.PI * u());
}

/** Runs the chart's recursion with its own limit factor (ewmaLimitFactor) on seeded N(shift, 1) data until its first signal. */
function simulatedArl(lambda: number, L: number, shift: number, sided: 'one' | 'two', runs: number, seed: number): { mean: number; se: number } {
  const z = normalDraws(seed);
  const limits = Array.from({ length: 2000 }, (_, i) => L * ewmaLimitFactor(lambda, i + 1, true));
  let sum = 0;
  let sumSq = 0;
  for (let r = 0; r < runs; r++) {
    let w = 0;
    let n = 0;
    for (;;) {
      w = lambda * (shift + z()) + (1 - lambda) * w;
      const limit = limits[Math.min(n, limits.length - 1)]!;
      n++;
      if (w > limit || (sided === 'two' && w < -limit)) break;
    }
    sum += n;
    sumSq += n * n;
  }
  const mean = sum / runs;
  return { mean, se: Math.sqrt((sumSq / runs - mean * mean) / runs) };
}

describe('EWMA run lengths with exact time-varying limits, against a simulation of the chart', () => {
  // No published table uses exact limits; a seeded simulation of the chart as the detectors run it is the check (4 s.e.).
  it('simulates the same recursion and limits as ewmaChart', () => {
    const z = normalDraws(3);
    const data = Array.from({ length: 50 }, () => z());
    let w = 0;
    ewmaChart(data, 0, 1, { lambda: 0.2, L: 2.8 }).forEach((p, i) => {
      w = 0.2 * data[i]! + 0.8 * w;
      expect(p.ewma).toBeCloseTo(w, 12);
      expect(p.ucl).toBeCloseTo(2.8 * ewmaLimitFactor(0.2, i + 1, true), 12);
    });
  });

  for (const [lambda, L, shift, sided] of [
    [0.2, 2.8, 0, 'two'],
    [0.2, 2.8, 1, 'two'],
    [0.1, 2.6, 0.5, 'one'],
  ] as const) {
    it(`λ = ${lambda}, L = ${L}, shift ${shift}, ${sided}-sided`, () => {
      const sim = simulatedArl(lambda, L, shift, sided, 20_000, 11);
      const arl = ewmaArl({ lambda, L, shift, sided, exactLimits: true });
      expect(Math.abs(arl - sim.mean)).toBeLessThan(4 * sim.se);
    });
  }

  it('are shorter than with steady-state limits, most of all for a small λ and a shift present from the start', () => {
    for (const lambda of [0.05, 0.2, 0.5]) {
      const exact = ewmaArl({ lambda, L: 3, shift: 1, sided: 'two', exactLimits: true });
      const steady = ewmaArl({ lambda, L: 3, shift: 1, sided: 'two' });
      expect(exact).toBeLessThan(steady);
    }
    const gap = (lambda: number) => 1 - ewmaArl({ lambda, L: 3, shift: 1, sided: 'two', exactLimits: true }) / ewmaArl({ lambda, L: 3, shift: 1, sided: 'two' });
    expect(gap(0.05)).toBeGreaterThan(gap(0.5));
  });
});
