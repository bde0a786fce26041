import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { cusumArl } from '../../src/analysis/arl/cusumArl.ts';
import { ewmaArl } from '../../src/analysis/arl/ewmaArl.ts';
import { runLengthFrom, solveRunLength } from '../../src/analysis/arl/runLengthEquation.ts';

// Properties every run-length function has by construction of the charts (Page 1954; Roberts 1959): a larger shift is found
// sooner, wider limits raise false alarms less often, and a headstart only shortens the run.
const sided = fc.constantFrom<'one' | 'two'>('one', 'two');
const runs = { numRuns: 40 };

describe('CUSUM run-length properties', () => {
  it('falls as the shift grows (upward shifts; both directions for two-sided)', () => {
    fc.assert(
      fc.property(fc.double({ min: 0, max: 1, noNaN: true }), fc.double({ min: 2, max: 6, noNaN: true }), fc.double({ min: 0, max: 2, noNaN: true }), sided, (k, h, shift, s) => {
        expect(cusumArl({ k, h, shift: shift + 0.25, sided: s })).toBeLessThan(cusumArl({ k, h, shift, sided: s }));
      }),
      runs,
    );
  });

  it('rises with h and falls with the headstart', () => {
    fc.assert(
      fc.property(fc.double({ min: 0.1, max: 1, noNaN: true }), fc.double({ min: 1, max: 6, noNaN: true }), fc.double({ min: 0, max: 0.85, noNaN: true }), sided, (k, h, f, s) => {
        const base = cusumArl({ k, h, shift: 0, sided: s, headstart: f });
        expect(cusumArl({ k, h: h + 0.5, shift: 0, sided: s, headstart: f })).toBeGreaterThan(base);
        expect(cusumArl({ k, h, shift: 0, sided: s, headstart: f + 0.1 })).toBeLessThan(base);
      }),
      runs,
    );
  });

  it('is symmetric in the shift when two-sided, and never below 1', () => {
    fc.assert(
      fc.property(fc.oneof(fc.constant(0), fc.double({ min: 0.05, max: 1, noNaN: true })), fc.double({ min: 1, max: 6, noNaN: true }), fc.double({ min: -4, max: 4, noNaN: true }), fc.double({ min: 0, max: 0.9, noNaN: true }), (k, h, shift, f) => {
        const up = cusumArl({ k, h, shift, sided: 'two', headstart: f });
        expect(up / cusumArl({ k, h, shift: -shift, sided: 'two', headstart: f })).toBeCloseTo(1, 9);
        expect(up).toBeGreaterThanOrEqual(1);
      }),
      runs,
    );
  });
});

describe('EWMA run-length properties', () => {
  it('falls as the shift grows and rises with L', () => {
    fc.assert(
      fc.property(fc.double({ min: 0.1, max: 1, noNaN: true }), fc.double({ min: 2, max: 3.5, noNaN: true }), fc.double({ min: 0, max: 2, noNaN: true }), sided, fc.boolean(), (lambda, L, shift, s, exactLimits) => {
        const base = ewmaArl({ lambda, L, shift, sided: s, exactLimits });
        expect(ewmaArl({ lambda, L, shift: shift + 0.25, sided: s, exactLimits })).toBeLessThan(base);
        expect(ewmaArl({ lambda, L: L + 0.1, shift, sided: s, exactLimits })).toBeGreaterThan(base);
      }),
      { numRuns: 25 },
    );
  });
});

describe('Nyström solution', () => {
  it('has converged: twice the nodes change the run length by less than 1e-8 (relative)', () => {
    const cases = [
      { step: { slope: 1, drift: -0.5, spread: 1 }, region: { lower: 0, upper: 5, holdAtLower: true } },
      { step: { slope: 1, drift: 0.5, spread: 1 }, region: { lower: 0, upper: 12, holdAtLower: true } },
      { step: { slope: 1 - 0.03, drift: 0, spread: 0.03 }, region: { lower: -0.3, upper: 0.3, holdAtLower: false } },
      { step: { slope: 1 - 0.1, drift: 0.1, spread: 0.1 }, region: { lower: -1.5, upper: 0.65, holdAtLower: true } },
    ];
    for (const { step, region } of cases) {
      const coarse = solveRunLength(step, region);
      const fine = solveRunLength(step, region, 2 * coarse.atNodes.length);
      for (const x of [region.lower, (region.lower + region.upper) / 2, region.upper]) {
        expect(Math.abs(runLengthFrom(step, coarse, x) / runLengthFrom(step, fine, x) - 1)).toBeLessThan(1e-8);
      }
    }
  });
});
