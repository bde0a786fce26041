import { describe, expect, it } from 'vitest';
import { addInterval, EMPTY_SUMS, groupBaseline, ownRateBaseline, poolBaselines, PRIOR_DEGREES, rateBaseline, withinProcessVariance } from '../../src/analysis/baseline.ts';
import type { BaselineSums } from '../../src/analysis/model.ts';
import { seededRandom } from '../../src/simulation/random.ts';

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

describe('the wear-process variance a group tells its units', () => {
  // Invented units of one design: rates spread 40 % about 0.008 ppm/h, wear-process variance q = 0.0032 ppm²/h, lab
  // variance 1 ppm² per reading (2 per increment), intervals of 150–350 h, 12 per unit.
  const q = 0.0032;
  const labVar = 2;
  const units = (seed: number, n: number) => {
    const rng = seededRandom(seed);
    return Array.from({ length: n }, () => {
      const rate = 0.008 * Math.exp(0.39 * rng.normal() - 0.076);
      let s = EMPTY_SUMS;
      // Readings on one charge: consecutive increments share a reading, whose lab noise telescopes.
      let noise = Math.sqrt(labVar / 2) * rng.normal();
      for (let i = 0; i < 12; i++) {
        const hours = rng.uniform(150, 350);
        const next = Math.sqrt(labVar / 2) * rng.normal();
        s = addInterval(s, { hours, increment: rate * hours + Math.sqrt(q * hours) * rng.normal() + next - noise }, labVar);
        noise = next;
      }
      return s;
    });
  };

  /** The variance within `all`, from their pooled sums and the sum and sum of squares of their own rates. */
  const withinOf = (all: readonly BaselineSums[]) => {
    const rates = all.map((s) => s.sumIncrement / s.sumHours);
    return withinProcessVariance(poolBaselines(all), all.length, rates.reduce((a, r) => a + r, 0), rates.reduce((a, r) => a + r * r, 0))!;
  };

  it('takes the units’ rate differences out of the pooled residuals, where one rate for the group overstates the variance', () => {
    const all = units(7, 400);
    const pooled = poolBaselines(all);
    const within = withinOf(all);
    expect(within.degrees).toBe(400 * 11);
    // The method of moments within units recovers q; the residuals about the group's one rate carry the spread too.
    expect(within.processVariance).toBeGreaterThan(q * 0.8);
    expect(within.processVariance).toBeLessThan(q * 1.2);
    const oneRate = (rateBaseline(pooled, all.length, 250)!.processVariance * pooled.sumHours) / (pooled.sumHours - pooled.sumHoursSq / pooled.sumHours);
    expect(oneRate).toBeGreaterThan(q * 1.5);
    const rate = all[0]!.sumIncrement / all[0]!.sumHours;
    expect(withinProcessVariance(all[0]!, 1, rate, rate ** 2)).toBeUndefined();
  });

  it('moderates a component’s own estimate, weighing the group’s as PRIOR_DEGREES intervals, with t of both degrees', () => {
    // The six intervals of the Student-t example above: unbiased 40/1250, ν = 5.
    const s = sums([[250, 10], [250, 14], [250, 6], [250, 12], [250, 8], [250, 10]]);
    const prior = { processVariance: 0.01, degrees: 1000 };
    const nu = 5 + PRIOR_DEGREES;
    const expected = ((5 * (40 / 1250) + PRIOR_DEGREES * 0.01) / nu) * (nu / (nu - 2));
    expect(ownRateBaseline(s, 250, undefined, prior)!.processVariance).toBeCloseTo(expected, 12);
    // A group of few intervals counts for no more than it has.
    const small = { processVariance: 0.01, degrees: 10 };
    expect(ownRateBaseline(s, 250, undefined, small)!.processVariance).toBeCloseTo(((5 * (40 / 1250) + 10 * 0.01) / 15) * (15 / 13), 12);
    // Over many units, moderated estimates scatter far less about q than each unit's own.
    const all = units(11, 200);
    const within = withinOf(all);
    const spread = (xs: number[]) => Math.sqrt(xs.reduce((a, x) => a + (x - q) ** 2, 0) / xs.length);
    const alone = all.map((u) => ownRateBaseline(u, 250)!.processVariance);
    const moderated = all.map((u) => ownRateBaseline(u, 250, undefined, within)!.processVariance);
    expect(spread(moderated)).toBeLessThan(spread(alone) / 2);
  });
});
