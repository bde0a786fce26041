/** The benchmark fleet (bench/fleet.ts) and lab feed (bench/pipeline.ts) follow the model they document. */
import { describe, expect, it } from 'vitest';
import { FLEET_MODEL, simulateComponent, simulateFleet } from '../../bench/fleet.ts';
import { labFeed } from '../../bench/pipeline.ts';
import { parseResultEvent } from '../../src/domain/event.ts';

describe('benchmark fleet', () => {
  it('spreads the in-control wear rate lognormally with the documented mean and coefficient of variation', () => {
    // Lognormal moments (textbook): with σ² = ln(1 + CV²) and μ = −σ²/2 the mean is 1 and the CV is CV.
    const rates = simulateFleet(4000, { fleetSeed: 11, samples: 2 }).map((c) => c.rate);
    const mean = rates.reduce((a, b) => a + b, 0) / rates.length;
    const sd = Math.sqrt(rates.reduce((a, b) => a + (b - mean) ** 2, 0) / (rates.length - 1));
    // Standard error of the mean ≈ 0.3/√4000 ≈ 0.5 %; of the CV about 1.5 % relative: ±4 % and ±10 % are wide of both.
    expect(mean / FLEET_MODEL.rate).toBeGreaterThan(0.96);
    expect(mean / FLEET_MODEL.rate).toBeLessThan(1.04);
    expect(sd / mean).toBeGreaterThan(0.27);
    expect(sd / mean).toBeLessThan(0.33);
  });

  it('gives a stepped component the sampling times and readings of its in-control twin up to the step, and faster wear after it', () => {
    const twin = simulateComponent({ fleetSeed: 3, index: 7, samples: 60 });
    const stepped = simulateComponent({ fleetSeed: 3, index: 7, samples: 60, step: (hours) => ({ atHours: hours[29]!, factor: 3 }) });
    expect(stepped.hours).toEqual(twin.hours);
    expect(stepped.samples.slice(0, 30).map((s) => s.readings.Fe)).toEqual(twin.samples.slice(0, 30).map((s) => s.readings.Fe));
    const fe = (c: typeof twin, i: number) => {
      const r = c.samples[i]!.readings.Fe!;
      return r.kind === 'value' ? r.value : NaN;
    };
    const later = (c: typeof twin) => c.samples.slice(35).reduce((sum, _, i) => sum + fe(c, 35 + i), 0);
    expect(later(stepped)).toBeGreaterThan(1.8 * later(twin));
  });

  it('draws oil changes and make-up oil as configured: oil hours never exceed the drain interval', () => {
    const c = simulateComponent({ fleetSeed: 5, index: 0, samples: 80 });
    const oilHours = c.samples.map((s) => s.oilHours!);
    expect(Math.max(...oilHours)).toBeLessThanOrEqual(FLEET_MODEL.series.drainHours);
    expect(c.samples.filter((s) => s.oilChanged).length).toBeGreaterThan(10);
    expect(c.samples.filter((s) => !s.oilChanged).every((s) => s.topUpLitres > 0)).toBe(true);
  });
});

describe('lab feed of the queue benchmarks', () => {
  const now = Date.parse('2026-06-01T00:00:00Z');
  const feed = labFeed({ components: 12, samplesPerComponent: 9, faultyShare: 0.25, endsBeforeNowMs: 86_400_000, now, seed: 4, unitPrefix: 'T' });

  it('holds valid events, in sampling-time order across the fleet, all in the past', () => {
    expect(feed).toHaveLength(12 * 9);
    for (const e of feed) expect(parseResultEvent(e).ok).toBe(true);
    const times = feed.map((e) => Date.parse(e.sampledAt));
    expect(times).toEqual([...times].sort((a, b) => a - b));
    expect(Math.max(...times)).toBeLessThan(now);
    // Interleaved: the first ten events come from more than one component.
    expect(new Set(feed.slice(0, 10).map((e) => e.unit)).size).toBeGreaterThan(1);
  });
});
