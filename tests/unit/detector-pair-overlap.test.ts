/**
 * The EWMA and the CUSUM of one metal watch the same standardised prediction errors, so their false alarms overlap:
 * `wearshift design noise` designs each as if independent and says that together they open fewer incidents than the
 * sum (src/cli/commands/designNoise.ts, "about 0.7 of it at the built-in λ and k, simulated"). This is that
 * simulation, run with the product's own charts (ewmaChart's limits, cusumStep) at the built-in rise-side design, on
 * in-control N(0, 1) errors from a seeded generator: a check of our own arithmetic, not of a published table.
 */
import { describe, expect, it } from 'vitest';
import { changeDesign } from '../../src/analysis/budget.ts';
import { cusumStart, cusumStep } from '../../src/analysis/cusum.ts';
import { ewmaLimitFactor } from '../../src/analysis/ewma.ts';
import { ConfigSchema } from '../../src/domain/config.ts';
import { resolveSettings } from '../../src/domain/settings.ts';

/** mulberry32: a small seeded generator of uniform numbers in [0, 1). */
function uniform(seed: number): () => number {
  let a = seed;
  return () => {
    a = (a + 0x6d2b79f5) | 0;
    let t = Math.imul(a ^ (a >>> 15), 1 | a);
    t = (t + Math.imul(t ^ (t >>> 7), 61 | t)) ^ t;
    return ((t ^ (t >>> 14)) >>> 0) / 4294967296;
  };
}

/** Standard normal numbers by the polar method. */
function normal(seed: number): () => number {
  const u = uniform(seed);
  let spare: number | undefined;
  return () => {
    if (spare !== undefined) {
      const s = spare;
      spare = undefined;
      return s;
    }
    for (;;) {
      const x = 2 * u() - 1;
      const y = 2 * u() - 1;
      const q = x * x + y * y;
      if (q > 0 && q < 1) {
        const f = Math.sqrt((-2 * Math.log(q)) / q);
        spare = y * f;
        return x * f;
      }
    }
  };
}

describe('the EWMA and CUSUM of one metal, in control', () => {
  it('signal first, either of them, after about 0.7 of the run length each has alone: together they count as about 1.4 charts, not 2', () => {
    const settings = resolveSettings(ConfigSchema.parse({}), { unit: 'PS1-P1', component: 'gearbox' });
    const { rise } = changeDesign(settings.detection, settings.population);
    const { lambda } = settings.detection.ewma;
    const cusum = { k: settings.detection.cusum.k, h: rise.cusumH, headstart: settings.detection.cusum.headstart };
    const z = normal(20261205);
    const runs = 1500;
    let ewmaSum = 0;
    let cusumSum = 0;
    let eitherSum = 0;
    for (let r = 0; r < runs; r++) {
      let ewma = 0;
      let state = cusumStart(cusum);
      let ewmaAt = 0;
      let cusumAt = 0;
      for (let i = 1; ewmaAt === 0 || cusumAt === 0; i++) {
        const x = z();
        ewma = lambda * x + (1 - lambda) * ewma;
        const next = cusumStep(state, x, cusum);
        state = next;
        if (ewmaAt === 0 && ewma > rise.ewmaL * ewmaLimitFactor(lambda, i, true)) ewmaAt = i;
        if (cusumAt === 0 && next.signal === 'up') cusumAt = i;
      }
      ewmaSum += ewmaAt;
      cusumSum += cusumAt;
      eitherSum += Math.min(ewmaAt, cusumAt);
    }
    const [ewmaArl, cusumArl, eitherArl] = [ewmaSum / runs, cusumSum / runs, eitherSum / runs];
    // Each alone: the run length it was designed for (a mean of 1 500 run lengths: within about ±8 %).
    expect(Math.abs(ewmaArl / rise.arl0 - 1)).toBeLessThan(0.1);
    expect(Math.abs(cusumArl / rise.arl0 - 1)).toBeLessThan(0.1);
    // Together: the false-alarm rate of either is about 0.7 of the two rates added (0.72 in 3 000 runs of another seed).
    const overlap = 1 / eitherArl / (1 / ewmaArl + 1 / cusumArl);
    expect(overlap).toBeGreaterThan(0.62);
    expect(overlap).toBeLessThan(0.82);
  });
});
