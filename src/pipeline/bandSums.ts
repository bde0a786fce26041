/**
 * Population band statistics from sums: n, Σx and Σx² per band (and the sorted values for the percentile method)
 * give the mean and the sample standard deviation of the band, with the band edges of the group's settings.
 */
import type { BandStats } from '../analysis/model.ts';
import { populationMeasurands } from '../analysis/populationStats.ts';
import type { Population } from '../domain/config.ts';
import type { Measurand } from '../domain/measurands.ts';

export interface BandSums {
  readonly n: number;
  readonly sum: number;
  readonly sumSq: number;
  /** Sorted; kept for the percentile method only. */
  readonly values?: readonly number[];
}

export function bandEdges(population: Population): number[] {
  return [...new Set(population.bandHours)].sort((a, b) => a - b);
}

/**
 * Summation order differs with arrival order (and Redis adds in long double), which moves the last bits of a
 * sum. Twelve significant digits is far below any lab's resolution and far above that noise, so the same
 * results give the same limits whatever the order they came in.
 */
const SIGNIFICANT_DIGITS = 12;

function settle(x: number): number {
  return x === 0 ? 0 : Number(x.toPrecision(SIGNIFICANT_DIGITS));
}

/** BandStats for every band of every population measurand of the group; an empty band has n = 0. */
export function bandStatsFromSums(
  sums: Partial<Record<Measurand, ReadonlyMap<number, BandSums>>>,
  population: Population,
): Partial<Record<Measurand, BandStats[]>> {
  const edges = bandEdges(population);
  const keepValues = population.method === 'percentile';
  const out: Partial<Record<Measurand, BandStats[]>> = {};
  for (const m of populationMeasurands(population)) {
    out[m] = edges.map((fromHours, i) => {
      const s = sums[m]?.get(fromHours);
      const n = s?.n ?? 0;
      const mean = n === 0 ? 0 : settle(s!.sum / n);
      const variance = n < 2 ? 0 : Math.max(0, (s!.sumSq - (s!.sum * s!.sum) / n) / (n - 1));
      return {
        fromHours,
        toHours: edges[i + 1] ?? null,
        n,
        mean,
        sd: settle(Math.sqrt(variance)),
        ...(keepValues && { values: s?.values ?? [] }),
      };
    });
  }
  return out;
}
