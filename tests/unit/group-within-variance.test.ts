/**
 * The group statistics a component is judged with carry the wear-process variance within the group's units
 * (baseline.ts withinProcessVariance), computed from the additive month buckets the group shares are kept in: adding
 * and taking out components (a component is judged against the others only) gives what the remaining units' own
 * baselines give directly. Invented units of one design; the noise model of src/simulation/wearSeries.ts.
 */
import { describe, expect, it } from 'vitest';
import { addInterval, EMPTY_SUMS, poolBaselines, withinProcessVariance } from '../../src/analysis/baseline.ts';
import type { BaselineSums } from '../../src/analysis/model.ts';
import { parseConfig } from '../../src/domain/configFile.ts';
import { resolveSettings } from '../../src/domain/settings.ts';
import { baselineBucketOf, combineBuckets, groupStatsOf, type MonthBucket } from '../../src/pipeline/groupShares.ts';
import { seededRandom } from '../../src/simulation/random.ts';

const settings = resolveSettings(parseConfig('detection:\n  measurands: [Fe]\n'), { unit: 'U', component: 'gearbox', group: 'g' });

function unit(seed: number): BaselineSums {
  const rng = seededRandom(seed);
  const rate = 0.04 * Math.exp(0.39 * rng.normal() - 0.076);
  let s = EMPTY_SUMS;
  let noise = rng.normal();
  for (let i = 0; i < 12; i++) {
    const hours = rng.uniform(150, 350);
    const next = rng.normal();
    s = addInterval(s, { hours, increment: rate * hours + Math.sqrt(0.016 * hours) * rng.normal() + next - noise }, 2);
    noise = next;
  }
  return s;
}

const bucket = (s: BaselineSums): MonthBucket => ({ population: {}, baselines: { Fe: baselineBucketOf(s)! } });

function direct(units: readonly BaselineSums[]) {
  const rates = units.map((s) => s.sumIncrement / s.sumHours);
  return withinProcessVariance(poolBaselines(units), units.length, rates.reduce((a, r) => a + r, 0), rates.reduce((a, r) => a + r * r, 0))!;
}

describe('the group statistics carry the variance within units', () => {
  it('from the month buckets, as the units’ own baselines give it, also with a component taken out', () => {
    const units = Array.from({ length: 12 }, (_, i) => unit(100 + i));
    const all = combineBuckets(units.map((u) => [bucket(u), 1] as const), false);
    const within = groupStatsOf('g', all, settings).baselines.Fe!.within!;
    const expected = direct(units);
    expect(within.degrees).toBe(expected.degrees);
    expect(within.processVariance).toBeCloseTo(expected.processVariance, 9);
    // A component is judged against the others: its own share taken out of the group's.
    const others = combineBuckets([[all, 1], [bucket(units[0]!), -1]], false);
    const without = groupStatsOf('g', others, settings).baselines.Fe!.within!;
    const expectedWithout = direct(units.slice(1));
    expect(without.degrees).toBe(expectedWithout.degrees);
    expect(without.processVariance).toBeCloseTo(expectedWithout.processVariance, 9);
    // One component is no group: no variance within units.
    expect(groupStatsOf('g', bucket(units[0]!), settings).baselines.Fe!.within).toBeUndefined();
  });
});
