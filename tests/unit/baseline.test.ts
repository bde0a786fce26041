import { describe, expect, it } from 'vitest';
import { addInterval, EMPTY_SUMS, groupBaseline, ownRateBaseline, poolBaselines, rateBaseline } from '../../src/analysis/baseline.ts';

const sums = (intervals: [hours: number, increment: number][], labVar = 0) => intervals.reduce((s, [hours, increment]) => addInterval(s, { hours, increment }, labVar), EMPTY_SUMS);

describe('baselines', () => {
  it('rate is Σincrement / Σhours and the process variance comes from the residuals (method of moments)', () => {
    // Increments 10, 14, 6 over 250 h each: rate 30/750 = 0.04 ppm/h; residuals 0, 4, −4 → Σr² = 32 over 750 h.
    const b = rateBaseline(sums([[250, 10], [250, 14], [250, 6]]), 1, 250)!;
    expect(b.rate).toBeCloseTo(0.04, 12);
    expect(b.processVariance).toBeCloseTo(32 / 750, 12);
  });

  it('lab variance is taken out of the residuals, down to the floor of half a reading per typical interval', () => {
    const b = rateBaseline(sums([[250, 10], [250, 14], [250, 6]], 20), 1, 250)!;
    // (32 − 3·20)/750 < 0, so the floor holds: half of one reading's variance (20/2) per 250 h.
    expect(b.processVariance).toBeCloseTo(5 / 250, 12);
  });

  it('an own baseline predicts with the unbiased process variance widened for its few degrees of freedom (Student t)', () => {
    // Six intervals of 250 h, increments 10, 14, 6, 12, 8, 10: rate 60/1500 = 0.04 ppm/h; residuals 0, 4, −4, 2, −2, 0 → Σr² = 40.
    const s = sums([[250, 10], [250, 14], [250, 6], [250, 12], [250, 8], [250, 10]]);
    expect(rateBaseline(s, 1, 250)!.processVariance).toBeCloseTo(40 / 1500, 12);
    // Fitting the rate takes one interval's share: E[Σr²] = q·(H − Σh²/H) = q·1250; ν = 5 gives the factor 5/3.
    const own = ownRateBaseline(s, 250)!;
    expect(own.processVariance).toBeCloseTo((40 / 1250) * (5 / 3), 12);
    expect(own.rate).toBeCloseTo(0.04, 12);
  });

  it('intervals after the own baseline refine its process variance, not its rate', () => {
    const first = sums([[250, 10], [250, 14], [250, 6], [250, 12], [250, 8], [250, 10]]);
    const later = sums([[250, 20], [250, 0], [250, 10], [250, 10], [250, 10], [250, 10]]);
    const own = ownRateBaseline(first, 250, later)!;
    // Rate from the baseline alone (60/1500); process variance from all twelve intervals (rate 120/3000, Σr² = 240).
    expect(own.rate).toBeCloseTo(0.04, 12);
    const effectiveHours = 3000 - (12 * 250 ** 2) / 3000;
    expect(own.processVariance).toBeCloseTo((240 / effectiveHours) * (11 / 9), 12);
  });

  it('a group baseline pools the rate and carries the unit-to-unit spread of the components’ own rates', () => {
    const a = sums([[500, 20]]); // 0.04 ppm/h
    const b = sums([[500, 30]]); // 0.06 ppm/h
    const c = sums([[1000, 50]]); // 0.05 ppm/h
    const g = groupBaseline([a, b, c], 250)!;
    expect(g.rate).toBeCloseTo(100 / 2000, 12);
    // Sample variance of 0.04, 0.06, 0.05 = 0.0001.
    expect(g.rateVariance).toBeCloseTo(0.0001, 12);
    expect(g.components).toBe(3);
    expect(poolBaselines([a, b, c]).intervals).toBe(3);
  });
});
