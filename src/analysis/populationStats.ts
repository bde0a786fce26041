/**
 * Population statistics of a group: per measurand and oil-hours band, the spread of like-for-like results.
 * Banding matters because metal accumulates over a charge: a level normal at 900 oil hours is high at 100.
 */
import { mean, quantileSorted, sampleStandardDeviation } from 'simple-statistics';
import type { Population } from '../domain/config.ts';
import { componentKey, type Sample } from '../domain/event.ts';
import { measurandsOfKind, type Measurand } from '../domain/measurands.ts';
import { readingNumber } from '../domain/reading.ts';
import { latestRevisions } from './history.ts';
import type { BandStats } from './model.ts';

/** Measurands given population limits: as configured, else every wear metal and the dirt and coolant indicators. */
export function populationMeasurands(population: Population): readonly Measurand[] {
  return population.measurands ?? [...measurandsOfKind('wear'), 'Si', 'Na', 'K'];
}

/**
 * Band statistics over the latest revision of every sample of a group (samples of many components).
 *
 * Bands are [edge, next edge) in oil hours, from the sorted `population.bandHours`, the last one open-ended;
 * every band is listed, empty ones with n = 0 (mean and sd 0), so that "not enough data" can say how many there
 * are. A sample without oil hours, or below the first edge, belongs to no band. A censored reading enters at
 * its bound ("<1" as 1, ">5000" as 5000): leaving it out would lift the statistics of a clean population more
 * than the bound does. sd is the sample standard deviation (n − 1; 0 for a single result). `values` (sorted) are
 * kept only for the percentile method.
 */
export function populationBands(
  samples: Iterable<Sample>,
  population: Population,
  measurands: readonly Measurand[],
): Partial<Record<Measurand, BandStats[]>> {
  const edges = [...new Set(population.bandHours)].sort((a, b) => a - b);
  const values = new Map<Measurand, number[][]>(measurands.map((m) => [m, edges.map(() => [])]));
  const { winners } = latestRevisions(samples, (s) => `${componentKey(s)}\u0000${s.sampleId}`);
  for (const sample of winners) {
    const band = bandIndex(edges, sample.oilHours);
    if (band === undefined) continue;
    for (const [m, perBand] of values) {
      const reading = sample.readings[m];
      const v = reading && readingNumber(reading);
      if (v !== undefined) perBand[band]!.push(v);
    }
  }
  const keepValues = population.method === 'percentile';
  const out: Partial<Record<Measurand, BandStats[]>> = {};
  for (const [m, perBand] of values) {
    out[m] = perBand.map((vs, i) => bandStats(vs.sort((a, b) => a - b), edges[i]!, edges[i + 1] ?? null, keepValues));
  }
  return out;
}

/** The band holding `oilHours`: from its lower edge (inclusive) to the next band's (exclusive). */
export function bandFor(bands: readonly BandStats[], oilHours: number): BandStats | undefined {
  return bands.find((b) => oilHours >= b.fromHours && (b.toHours === null || oilHours < b.toHours));
}

/** Linear interpolation between order statistics (Hyndman & Fan type 7, the default of R and numpy). */
export function percentileOfSorted(sorted: readonly number[], percent: number): number {
  // quantileSorted only reads its argument; its typing just does not say so.
  return quantileSorted(sorted as number[], percent / 100);
}

function bandIndex(edges: readonly number[], oilHours: number | undefined): number | undefined {
  if (oilHours === undefined || !(oilHours >= (edges[0] ?? Infinity))) return undefined;
  let i = 0;
  while (i + 1 < edges.length && oilHours >= edges[i + 1]!) i++;
  return i;
}

function bandStats(sorted: number[], fromHours: number, toHours: number | null, keepValues: boolean): BandStats {
  const n = sorted.length;
  return {
    fromHours,
    toHours,
    n,
    mean: n === 0 ? 0 : mean(sorted),
    sd: n < 2 ? 0 : sampleStandardDeviation(sorted),
    ...(keepValues && { values: sorted }),
  };
}
