import { describe, expect, it } from 'vitest';
import { cusumArl } from '../../src/analysis/arl/cusumArl.ts';
import { ewmaArl } from '../../src/analysis/arl/ewmaArl.ts';
import { cusumDecisionInterval } from '../../src/analysis/arl/solveCusum.ts';
import { ewmaLimitWidth } from '../../src/analysis/arl/solveEwma.ts';

describe('decision interval h for a target in-control run length', () => {
  it('gives h ≈ 5 for ARL0 = 930, one-sided, k = 0.5 (NIST/SEMATECH e-Handbook 6.3.2.3.1)', () => {
    expect(cusumDecisionInterval({ k: 0.5, arl0: 930, sided: 'one' })).toBeCloseTo(5, 2);
  });

  it('gives h ≈ 4 for ARL0 = 168, two-sided, k = 0.5 (Lucas & Crosier 1982, Table 1)', () => {
    expect(cusumDecisionInterval({ k: 0.5, arl0: 168, sided: 'two' })).toBeCloseTo(4, 2);
  });

  it('gives h ≈ 4 for ARL0 = 149 two-sided with the headstart h/2 (Lucas & Crosier 1982, Table 1, FIR)', () => {
    expect(Math.abs(cusumDecisionInterval({ k: 0.5, arl0: 149, sided: 'two', headstart: 0.5 }) - 4)).toBeLessThan(0.01);
  });

  it('meets its target exactly, and refuses a target no h can reach', () => {
    for (const [arl0, sided, headstart] of [[370, 'two', 0], [2500, 'two', 0.5], [50, 'one', 0.9]] as const) {
      const h = cusumDecisionInterval({ k: 0.5, arl0, sided, headstart });
      expect(cusumArl({ k: 0.5, h, shift: 0, sided, headstart }) / arl0).toBeCloseTo(1, 8);
    }
    // As h → 0 a one-sided chart signals whenever z > k: ARL0 → 1/(1 − Φ(0.5)) ≈ 3.24.
    expect(() => cusumDecisionInterval({ k: 0.5, arl0: 3, sided: 'one' })).toThrow(RangeError);
    expect(() => cusumDecisionInterval({ k: 0.5, arl0: 1, sided: 'one' })).toThrow(RangeError);
  });
});

describe('EWMA limit width L for a target in-control run length', () => {
  it('gives L ≈ 3.071 for λ = 0.5 and L ≈ 2.437 for λ = 0.03, two-sided ARL0 = 500 (Lucas & Saccucci 1990)', () => {
    expect(ewmaLimitWidth({ lambda: 0.5, arl0: 500, sided: 'two' })).toBeCloseTo(3.071, 3);
    expect(ewmaLimitWidth({ lambda: 0.03, arl0: 500, sided: 'two' })).toBeCloseTo(2.437, 3);
  });

  it('meets its target with exact limits too, which need a wider L than steady-state limits', () => {
    const exact = ewmaLimitWidth({ lambda: 0.2, arl0: 1000, sided: 'two', exactLimits: true });
    const steady = ewmaLimitWidth({ lambda: 0.2, arl0: 1000, sided: 'two' });
    expect(exact).toBeGreaterThan(steady);
    expect(ewmaArl({ lambda: 0.2, L: exact, shift: 0, sided: 'two', exactLimits: true }) / 1000).toBeCloseTo(1, 8);
    expect(ewmaArl({ lambda: 0.2, L: steady, shift: 0, sided: 'two' }) / 1000).toBeCloseTo(1, 8);
  });
});
