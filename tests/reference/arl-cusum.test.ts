import { describe, expect, it } from 'vitest';
import { cusumArl } from '../../src/analysis/arl/cusumArl.ts';
import { cusumStart, cusumStep } from '../../src/analysis/cusum.ts';

/** Published tables are rounded to 3 significant figures. */
function expectWithin(actual: number, expected: number, relative: number): void {
  expect(Math.abs(actual - expected) / expected, `${actual} vs ${expected}`).toBeLessThan(relative);
}

const SHIFTS = [0, 0.25, 0.5, 0.75, 1, 1.5, 2, 2.5, 3, 4, 5];

describe('one-sided CUSUM run lengths', () => {
  it('matches NIST/SEMATECH e-Handbook 6.3.2.3.1 (k = 0.5): h = 4 → 336 and 8.38 at 1σ; h = 5 → 930 and 10.4', () => {
    expectWithin(cusumArl({ k: 0.5, h: 4, shift: 0, sided: 'one' }), 336, 0.01);
    expectWithin(cusumArl({ k: 0.5, h: 4, shift: 1, sided: 'one' }), 8.38, 0.01);
    expectWithin(cusumArl({ k: 0.5, h: 5, shift: 0, sided: 'one' }), 930, 0.01);
    expectWithin(cusumArl({ k: 0.5, h: 5, shift: 1, sided: 'one' }), 10.4, 0.01);
  });

  it('matches Brook & Evans (1972), Biometrika 59(3): k = 0.5, h = 3 → 117.59 in control', () => {
    expectWithin(cusumArl({ k: 0.5, h: 3, shift: 0, sided: 'one' }), 117.59, 2e-4);
  });

  it("agrees with Siegmund's approximation (b = h + 1.166): about 1% at small shifts, a few % at larger ones", () => {
    // Siegmund (1985), as quoted in the NIST/SEMATECH e-Handbook: ARL = (exp(−2Δb) + 2Δb − 1)/(2Δ²), Δ = δ − k; b² when Δ = 0.
    const siegmund = (k: number, h: number, shift: number) => {
      const b = h + 1.166;
      const d = shift - k;
      return d === 0 ? b * b : (Math.exp(-2 * d * b) + 2 * d * b - 1) / (2 * d * d);
    };
    for (const [k, h] of [[0.5, 4], [0.5, 5], [0.25, 8]] as const) {
      for (const shift of [0, 0.25, 0.5, 1]) expectWithin(cusumArl({ k, h, shift, sided: 'one' }), siegmund(k, h, shift), 0.012);
      for (const shift of [1.5, 2]) expectWithin(cusumArl({ k, h, shift, sided: 'one' }), siegmund(k, h, shift), 0.05);
    }
  });
});

describe('two-sided CUSUM run lengths', () => {
  it('matches Lucas & Crosier (1982), Technometrics 24(3), Table 1: k = 0.5, h = 4, zero state, every shift', () => {
    const table = [168, 74.2, 26.6, 13.3, 8.38, 4.75, 3.34, 2.62, 2.19, 1.71, 1.31];
    SHIFTS.forEach((shift, i) => expectWithin(cusumArl({ k: 0.5, h: 4, shift, sided: 'two' }), table[i]!, 0.01));
  });

  it('matches Lucas & Crosier (1982) Table 1 with the fast-initial-response headstart h/2 = 2, every shift', () => {
    const table = [149, 62.7, 20.1, 8.97, 5.29, 2.86, 2.01, 1.59, 1.32, 1.07, 1.01];
    SHIFTS.forEach((shift, i) => expectWithin(cusumArl({ k: 0.5, h: 4, shift, sided: 'two', headstart: 0.5 }), table[i]!, 0.01));
  });

  it('combines two one-sided charts as 1/ARL = 1/ARL⁺ + 1/ARL⁻ in the zero state', () => {
    // The identity for two-sided CUSUMs (Kemp 1971; Lucas & Crosier 1982): the lower chart at shift δ is the upper one at −δ.
    for (const [k, h, shift] of [[0.5, 4, 0], [0.5, 5, 0.7], [0.25, 6, -0.3], [1, 3, 1.5]] as const) {
      const up = cusumArl({ k, h, shift, sided: 'one' });
      const down = cusumArl({ k, h, shift: -shift, sided: 'one' });
      expectWithin(cusumArl({ k, h, shift, sided: 'two' }), 1 / (1 / up + 1 / down), 1e-12);
    }
  });

  it('with a headstart differs from the one-sided combination, which would overstate the false-alarm rate', () => {
    const up = cusumArl({ k: 0.5, h: 4, shift: 0, sided: 'one', headstart: 0.5 });
    const naive = 1 / (2 / up);
    const exact = cusumArl({ k: 0.5, h: 4, shift: 0, sided: 'two', headstart: 0.5 });
    expect(Math.abs(exact - naive) / exact).toBeGreaterThan(0.05);
  });
});

/** Mulberry32: a small seeded generator, so that the simulation below is repeatable. */
function seeded(seed: number): () => number {
  let a = seed >>> 0;
  return () => {
    a = (a + 0x6d2b79f5) >>> 0;
    let t = a;
    t = Math.imul(t ^ (t >>> 15), t | 1);
    t ^= t + Math.imul(t ^ (t >>> 7), t | 61);
    return ((t ^ (t >>> 14)) >>> 0) / 4294967296;
  };
}

function normalDraws(seed: number): () => number {
  const u = seeded(seed);
  return () => Math.sqrt(-2 * Math.log(1 - u())) * Math.cos(2 * Math.PI * u());
}

function simulatedArl(p: { k: number; h: number; headstart: number }, shift: number, runs: number, seed: number): { mean: number; se: number } {
  const z = normalDraws(seed);
  let sum = 0;
  let sumSq = 0;
  for (let r = 0; r < runs; r++) {
    let state = cusumStart(p);
    let n = 0;
    for (;;) {
      n++;
      const next = cusumStep(state, shift + z(), p);
      if (next.signal) break;
      state = next;
    }
    sum += n;
    sumSq += n * n;
  }
  const mean = sum / runs;
  return { mean, se: Math.sqrt((sumSq / runs - mean * mean) / runs) };
}

describe('two-sided CUSUM with a headstart against a simulation of the chart itself', () => {
  // Above h/2 + k both sums can be positive with a total over h + 2k, where the Lucas & Crosier combination no longer holds
  // and the run length is followed line by line. A seeded simulation of cusumStep is the outside check (4 standard errors).
  for (const [p, shift] of [
    [{ k: 0.5, h: 4, headstart: 0.9 }, 0],
    [{ k: 0.5, h: 4, headstart: 0.9 }, 0.5],
    [{ k: 0.25, h: 8, headstart: 0.8 }, 0.25],
    [{ k: 0, h: 3, headstart: 0.8 }, 0.5],
  ] as const) {
    it(`k = ${p.k}, h = ${p.h}, headstart ${p.headstart}, shift ${shift}`, () => {
      const sim = simulatedArl(p, shift, 10_000, 7);
      const arl = cusumArl({ ...p, shift, sided: 'two' });
      expect(Math.abs(arl - sim.mean)).toBeLessThan(4 * sim.se);
    });
  }
});
