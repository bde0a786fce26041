import { describe, expect, it } from 'vitest';
import { bandFor, percentileOfSorted, populationBands, populationMeasurands } from '../../src/analysis/populationStats.ts';
import { PopulationSchema } from '../../src/domain/config.ts';
import type { ResultEvent } from '../../src/domain/event.ts';
import { measurandsOfKind } from '../../src/domain/measurands.ts';
import { sample } from './history-fixtures.ts';

const SIGMA = PopulationSchema.parse({});
const PERCENTILE = PopulationSchema.parse({ method: 'percentile' });

/** One sample of a group member: unit `P<i>`, its own sample number. */
const member = (i: number, oilHours: number | undefined, readings: ResultEvent['readings'], revision = 0) =>
  sample(i, { sampleId: `G-${i}`, unit: `P${i}`, revision, ...(oilHours !== undefined && { oilHours }), readings });

describe('populationBands', () => {
  it('bands by oil hours with the configured lower edges, the last one open', () => {
    const samples = [member(1, 0, { Fe: 2 }), member(2, 249.9, { Fe: 4 }), member(3, 250, { Fe: 10 }), member(4, 2000, { Fe: 50 })];
    const bands = populationBands(samples, SIGMA, ['Fe']).Fe!;
    expect(bands.map((b) => [b.fromHours, b.toHours, b.n])).toEqual([
      [0, 250, 2],
      [250, 500, 1],
      [500, 1000, 0],
      [1000, null, 1],
    ]);
    expect(bands[0]).toMatchObject({ mean: 3, sd: Math.SQRT2 }); // (2 + 4)/2; sqrt(((−1)² + 1²)/(2 − 1))
    expect(bands[1]).toMatchObject({ mean: 10, sd: 0 });
    expect(bands[2]).toMatchObject({ mean: 0, sd: 0 });
    expect(bands[0]!.values).toBeUndefined();
  });

  it('gives the sample mean and sample standard deviation (n − 1)', () => {
    // 15 results of 10 ppm and 15 of 20 ppm: mean 15; Σ(x − 15)² = 30 · 25 = 750; sd = sqrt(750/29) = 5.0855.
    const samples = Array.from({ length: 30 }, (_, i) => member(i, 300, { Fe: i < 15 ? 10 : 20 }));
    const [band] = populationBands(samples, SIGMA, ['Fe']).Fe!.filter((b) => b.n > 0);
    expect(band!.n).toBe(30);
    expect(band!.mean).toBeCloseTo(15, 12);
    expect(band!.sd).toBeCloseTo(Math.sqrt(750 / 29), 12);
  });

  it('uses only the latest revision of each sample, per component', () => {
    const samples = [
      member(1, 300, { Fe: 100 }, 0),
      member(1, 300, { Fe: 10 }, 1),
      { ...member(1, 300, { Fe: 20 }), unit: 'P-other' }, // same lab number, another component: a result of its own
    ];
    const band = bandFor(populationBands(samples, SIGMA, ['Fe']).Fe!, 300)!;
    expect(band).toMatchObject({ n: 2, mean: 15 });
  });

  it('counts a censored reading at its bound, and leaves out samples without oil hours or below the first edge', () => {
    const population = PopulationSchema.parse({ bandHours: [100, 500] });
    const samples = [member(1, 200, { Fe: '<1' }), member(2, 200, { Fe: 5 }), member(3, undefined, { Fe: 70 }), member(4, 50, { Fe: 90 })];
    const bands = populationBands(samples, population, ['Fe']).Fe!;
    expect(bands.map((b) => [b.n, b.mean])).toEqual([
      [2, 3],
      [0, 0],
    ]);
  });

  it('keeps the sorted values for the percentile method', () => {
    const samples = [member(1, 300, { Fe: 9 }), member(2, 300, { Fe: 3 }), member(3, 300, { Fe: 6 })];
    expect(bandFor(populationBands(samples, PERCENTILE, ['Fe']).Fe!, 300)!.values).toEqual([3, 6, 9]);
  });

  it('lists every requested measurand, with empty bands when none of the group reported it', () => {
    const bands = populationBands([member(1, 300, { Fe: 9 })], SIGMA, ['Fe', 'Cu']);
    expect(Object.keys(bands).sort()).toEqual(['Cu', 'Fe']);
    expect(bands.Cu!.every((b) => b.n === 0)).toBe(true);
  });
});

describe('bandFor', () => {
  const bands = populationBands([], SIGMA, ['Fe']).Fe!;
  it('finds the band by its inclusive lower and exclusive upper edge', () => {
    expect(bandFor(bands, 0)!.fromHours).toBe(0);
    expect(bandFor(bands, 249.99)!.fromHours).toBe(0);
    expect(bandFor(bands, 250)!.fromHours).toBe(250);
    expect(bandFor(bands, 99_999)!.fromHours).toBe(1000);
  });
  it('finds none below the first edge', () => {
    expect(bandFor(populationBands([], PopulationSchema.parse({ bandHours: [100] }), ['Fe']).Fe!, 99)).toBeUndefined();
  });
});

describe('percentileOfSorted', () => {
  it('interpolates between order statistics (Hyndman & Fan 1996, definition 7: R quantile() and numpy default)', () => {
    // Values 1..10: h = (n − 1)·p = 9 · 0.9 = 8.1 → x₉ + 0.1·(x₁₀ − x₉) = 9.1; for 97.5: 8.775 → 9.775.
    const oneToTen = Array.from({ length: 10 }, (_, i) => i + 1);
    expect(percentileOfSorted(oneToTen, 90)).toBeCloseTo(9.1, 12);
    expect(percentileOfSorted(oneToTen, 97.5)).toBeCloseTo(9.775, 12);
    expect(percentileOfSorted(oneToTen, 50)).toBeCloseTo(5.5, 12);
  });
});

describe('populationMeasurands', () => {
  it('defaults to every wear metal and Si, Na, K', () => {
    expect(populationMeasurands(SIGMA)).toEqual([...measurandsOfKind('wear'), 'Si', 'Na', 'K']);
    expect(populationMeasurands(PopulationSchema.parse({ measurands: ['Fe'] }))).toEqual(['Fe']);
  });
});
