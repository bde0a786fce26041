/**
 * The comparison with peers (`population` family, basis `peer rate`): its false-alarm probability per component
 * stays within the check's part of the budget. The limit is the upper prediction limit for one new observation from
 * the same normal population as n others, mean + t₁₋α,ₙ₋₁ · s · √(1 + 1/n), which a new observation exceeds with
 * probability exactly α (the textbook prediction interval for a single future observation; e.g. Hahn & Meeker,
 * Statistical Intervals, 1991 — from memory). Checked by simulation with a seeded generator: the count of exceedances
 * against its binomial spread.
 */
import { describe, expect, it } from 'vitest';
import { peerAlpha, peerLimitZ, peerScore, peerVerdict } from '../../src/analysis/rules/peers.ts';
import { ConfigSchema } from '../../src/domain/config.ts';
import { resolveSettings } from '../../src/domain/settings.ts';
import { seededRandom } from '../../src/simulation/random.ts';

const settings = resolveSettings(ConfigSchema.parse({}), { unit: 'U1', component: 'gearbox' });

describe('comparison with peers', () => {
  it('shares the check\u2019s part of the budget among the watched metals: 0.2 × 1 alarm / 5 years / 7 metals', () => {
    expect(settings.detection.measurands).toHaveLength(7);
    expect(peerAlpha(settings)).toBeCloseTo((0.2 * 1) / 5 / 7, 12);
    const one = resolveSettings(ConfigSchema.parse({ detection: { measurands: ['Fe'] } }), { unit: 'U1', component: 'gearbox' });
    expect(peerAlpha(one)).toBeCloseTo(0.04, 12);
  });

  it('a healthy unit exchangeable with its peers lies above their prediction limit with probability α, so the component with 7 metals stays within 0.04', () => {
    const rng = seededRandom(20261203);
    const alpha = peerAlpha(settings);
    const trials = 200_000;
    const n = 20;
    let above = 0;
    for (let t = 0; t < trials; t++) {
      let sum = 0;
      let sumSq = 0;
      for (let i = 0; i < n; i++) {
        const x = rng.normal();
        sum += x;
        sumSq += x * x;
      }
      const mean = sum / n;
      const sd = Math.sqrt((sumSq - n * mean * mean) / (n - 1));
      // Log rates: any scale; the peers' typical rate is e^mean.
      const score = peerScore(Math.exp(rng.normal()), { components: n, meanLogRate: mean, sdLogRate: sd }, settings)!;
      if (score > peerLimitZ(settings, n)) above += 1;
    }
    const expected = trials * alpha;
    const spread = Math.sqrt(trials * alpha * (1 - alpha));
    // Student's t by Cornish–Fisher is within 1 % of the tables here (tests/reference/student-t.test.ts): a few
    // exceedances at most, well inside five binomial standard deviations.
    expect(Math.abs(above - expected)).toBeLessThan(5 * spread);
    expect(1 - (1 - alpha) ** settings.detection.measurands.length).toBeLessThanOrEqual(0.04);
  });

  it('makes no comparison with too few peers or without a spread', () => {
    expect(peerScore(0.01, { components: 2, meanLogRate: Math.log(0.01), sdLogRate: 0.3 }, settings)).toBeUndefined();
    expect(peerScore(0.01, { components: 10, meanLogRate: Math.log(0.01), sdLogRate: 0 }, settings)).toBeUndefined();
    expect(peerScore(0.02, { components: 10, meanLogRate: Math.log(0.01), sdLogRate: 0.4 }, settings)).toBeCloseTo(Math.log(2) / 0.4, 12);
  });
});

describe('the peer finding\u2019s explanation', () => {
  const sums = { intervals: 12, sumHours: 3000, sumHoursSq: 3000 * 250, sumIncrement: 300, sumIncrementSq: 7600, sumIncrementHours: 75_000, sumLabVariance: 24 };
  const own = { sums, start: { sampleId: 'S00', sampledAt: '2025-01-01T00:00:00.000Z' }, completedAt: 11, completedSampleId: 'S12', completedSampledAt: '2025-05-06T00:00:00.000Z' };
  const peers = { components: 8, meanLogRate: Math.log(0.02), sdLogRate: 0.3 };
  const verdict = (m: 'Fe' | 'pq') => {
    const s = resolveSettings(ConfigSchema.parse({ detection: { measurands: [m] } }), { unit: 'U1', component: 'gearbox' });
    const sample = { sampleId: 'S20', sampledAt: '2025-08-01T00:00:00.000Z' } as Parameters<typeof peerVerdict>[0]['sample'];
    return peerVerdict({ unit: 'U1', component: 'gearbox', settings: s, sample, intervals: new Map() }, m, own, peers, false).finding!;
  };

  it('names the own baseline\u2019s samples from the reading its first interval starts at', () => {
    expect(verdict('Fe').explanation).toContain('its own usual rate 10 ppm/100 h, learnt from its samples S00 to S12 (12 intervals), against their typical 2 ppm/100 h');
  });

  it('gives the rates of the PQ index in index points, not ppm', () => {
    const text = verdict('pq').explanation;
    expect(text).toContain('its own usual rate 10 index points/100 h');
    expect(text).not.toContain('ppm');
  });
});
