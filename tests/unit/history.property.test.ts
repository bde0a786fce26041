import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { buildHistory } from '../../src/analysis/history.ts';
import type { GroupStats } from '../../src/analysis/model.ts';
import { populationBands, populationMeasurands } from '../../src/analysis/populationStats.ts';
import { cleanlinessFindings } from '../../src/analysis/rules/cleanliness.ts';
import { conditionFindings } from '../../src/analysis/rules/condition.ts';
import { limitFindings } from '../../src/analysis/rules/limit.ts';
import { populationFindings } from '../../src/analysis/rules/population.ts';
import { rateFindings } from '../../src/analysis/rules/rate.ts';
import type { Sample } from '../../src/domain/event.ts';
import { measurandsOfKind, type Measurand } from '../../src/domain/measurands.ts';
import type { Reading } from '../../src/domain/reading.ts';
import type { ComponentSettings } from '../../src/domain/settings.ts';
import { ruleInput, settingsFrom } from './history-fixtures.ts';

const DAY = 86_400_000;

const number = (max: number) => fc.integer({ min: 0, max: max * 10 }).map((n) => n / 10);
const reading = (max: number): fc.Arbitrary<Reading> =>
  fc.oneof(
    { weight: 4, arbitrary: number(max).map((value) => ({ kind: 'value' as const, value })) },
    { weight: 1, arbitrary: fc.record({ kind: fc.constant('censored' as const), bound: fc.constantFrom('below' as const, 'above' as const), limit: number(max) }) },
  );
const scale = fc.integer({ min: 0, max: 28 });
const code: fc.Arbitrary<Reading> = fc.record({ kind: fc.constant('code' as const), code: fc.record({ p4: fc.option(scale), p6: scale, p14: scale }) });

const readings = fc.record(
  {
    Fe: reading(200),
    Cu: reading(50),
    Si: reading(30),
    tbn: reading(12),
    tan: reading(5),
    v40: reading(300),
    water: reading(2000),
    glycol: reading(1),
    iso4406: code,
    p4: reading(5000),
    p6: reading(2000),
    p14: reading(200),
  },
  { requiredKeys: [] },
) as fc.Arbitrary<Partial<Record<Measurand, Reading>>>;

/** Samples of one component, with the odd cases on purpose: equal times, an unreadable time, missing hours. */
const sampleArb: fc.Arbitrary<Sample> = fc
  .record({
    sampleId: fc.constantFrom('A', 'B', 'C', 'D', 'E', 'F', 'G', 'H', 'I', 'J'),
    revision: fc.integer({ min: 0, max: 3 }),
    day: fc.option(fc.integer({ min: 0, max: 12 }), { freq: 12 }),
    unitHours: fc.option(fc.integer({ min: 0, max: 6000 }), { freq: 4 }),
    oilHours: fc.option(fc.integer({ min: 0, max: 1200 }), { freq: 4 }),
    oilChanged: fc.boolean(),
    componentChanged: fc.nat(9).map((n) => n === 0),
    topUpLitres: fc.integer({ min: 0, max: 60 }),
    readings,
  })
  .map(({ day, unitHours, oilHours, ...s }) => ({
    ...s,
    unit: 'PS2-P3',
    component: 'gearbox',
    time: day === null ? Number.NaN : day * DAY,
    sampledAt: day === null ? 'unreadable' : new Date(day * DAY).toISOString(),
    ...(unitHours !== null && { unitHours }),
    ...(oilHours !== null && { oilHours }),
  }));

const withShuffle = fc
  .array(sampleArb, { maxLength: 30 })
  .chain((samples) => fc.tuple(fc.constant(samples), fc.shuffledSubarray(samples, { minLength: samples.length, maxLength: samples.length })));

const SETTINGS: Record<'sigma' | 'percentile', ComponentSettings> = Object.fromEntries(
  (['sigma', 'percentile'] as const).map((method) => [
    method,
    settingsFrom(`
population: { method: ${method}, minResults: 2, bandHours: [0, 300, 800] }
groups:
  - name: pump-gearboxes
    sumpLitres: 120
    residualFraction: 0.15
    limits: { Fe: { caution: 80, alarm: 150 }, Si: { caution: 15 }, p4: { alarm: 4000 } }
    rateLimits: { Fe: { caution: 5, alarm: 20 }, Cu: { alarm: 3 } }
    newOil: { tbn: 10, tan: 1, v40: 220, oxidation: 5 }
    cleanliness: { target: "18/16/13" }
`),
  ]),
) as Record<'sigma' | 'percentile', ComponentSettings>;

function groupStats(samples: Sample[], settings: ComponentSettings): GroupStats {
  return { group: settings.group, bands: populationBands(samples, settings.population, populationMeasurands(settings.population)), baselines: {} };
}

function allFindings(samples: Sample[], settings: ComponentSettings) {
  const input = ruleInput(samples, settings, groupStats(samples, settings));
  return [limitFindings, rateFindings, populationFindings, conditionFindings, cleanlinessFindings].map((rule) => rule(input));
}

const RUNS = { numRuns: 300 };

describe('series builder properties', () => {
  it('builds the same history and the same findings whatever the arrival order', () => {
    fc.assert(
      fc.property(withShuffle, fc.constantFrom('sigma' as const, 'percentile' as const), ([samples, shuffled], method) => {
        expect(buildHistory(shuffled)).toEqual(buildHistory(samples));
        expect(allFindings(shuffled, SETTINGS[method])).toEqual(allFindings(samples, SETTINGS[method]));
      }),
      RUNS,
    );
  });

  it('lets a higher revision replace the result it re-issues', () => {
    fc.assert(
      fc.property(fc.array(sampleArb, { minLength: 1, maxLength: 30 }), fc.nat(), (samples, pick) => {
        const before = buildHistory(samples);
        const old = before.samples[pick % before.samples.length]!;
        const reissued: Sample = { ...old, revision: old.revision + 1, readings: { Fe: { kind: 'value', value: 999 } } };
        const after = buildHistory([...samples, reissued]);
        expect(after.samples).toHaveLength(before.samples.length);
        expect(after.samples.filter((s) => s.sampleId === old.sampleId)).toEqual([reissued]);
        expect(after.superseded).toContainEqual({ sampleId: old.sampleId, revision: old.revision, replacedBy: reissued.revision });
        expect(after.superseded.every((s) => s.revision < s.replacedBy)).toBe(true);
      }),
      RUNS,
    );
  });

  it('never throws on censored, missing or odd values, and keeps its invariants', () => {
    const wear = measurandsOfKind('wear');
    fc.assert(
      fc.property(fc.array(sampleArb, { maxLength: 30 }), (samples) => {
        const settings = SETTINGS.sigma;
        const input = ruleInput(samples, settings, groupStats(samples, settings));
        const h = input.history;
        expect(h.charges.flatMap((c) => c.samples)).toEqual(h.samples);
        expect(new Set(h.samples.map((s) => s.sampleId)).size).toBe(h.samples.length);
        for (const m of wear) {
          for (const iv of input.intervals(m)) {
            expect(iv.hours).toBeGreaterThan(0);
            expect(Number.isFinite(iv.rate)).toBe(true);
            expect(iv.carryOver).toBeGreaterThanOrEqual(0);
            expect(iv.carryOver).toBeLessThanOrEqual(1);
          }
        }
        const known = new Set(h.samples.map((s) => s.sampleId));
        for (const f of allFindings(samples, settings).flat()) {
          expect(known.has(f.sampleId)).toBe(true);
          expect(['caution', 'alarm']).toContain(f.severity);
          expect(f.explanation).toMatch(/\.$/);
        }
      }),
      RUNS,
    );
  });
});
