/**
 * A group's statistics kept as additive month buckets, so that "as of a month" is a sum over the months before it
 * and one component's share can be added, replaced or taken out exactly. Pure: storage adapters keep the buckets,
 * this module says what goes into them and what comes out.
 *
 * - Population: per `measurand|band edge`, n, Σx and Σx² of the accepted results sampled in the month (the values
 *   themselves too for the percentile method).
 * - Baselines: per measurand, the components whose own baseline was complete in the month: their pooled sums, and
 *   Σr, Σr², Σln r, Σ(ln r)² of their rates, from which the pooled rate, the unit-to-unit spread and the peers'
 *   log-rate spread follow (baseline.ts).
 */
import { EMPTY_SUMS, rateBaseline, withinProcessVariance } from '../analysis/baseline.ts';
import type { BaselineSums, GroupStats, RateBaseline } from '../analysis/model.ts';
import { populationMeasurands } from '../analysis/populationStats.ts';
import type { Sample } from '../domain/event.ts';
import type { Measurand } from '../domain/measurands.ts';
import { readingNumber } from '../domain/reading.ts';
import type { ComponentSettings } from '../domain/settings.ts';
import { bandEdges, bandStatsFromSums, type BandSums } from './bandSums.ts';
import type { BaselineShare } from './ports.ts';

/** `YYYY-MM` of an epoch-ms time (UTC). */
export function monthOf(time: number): string {
  return new Date(time).toISOString().slice(0, 7);
}

/** The first instant of the month after `month`. */
export function startOfNextMonth(month: string): number {
  const [y, m] = month.split('-').map(Number) as [number, number];
  return Date.UTC(m === 12 ? y + 1 : y, m === 12 ? 0 : m, 1);
}

export interface BaselineBucket {
  readonly components: number;
  readonly sums: BaselineSums;
  readonly sumRate: number;
  readonly sumRateSq: number;
  readonly positive: number;
  readonly sumLog: number;
  readonly sumLogSq: number;
}

export interface MonthBucket {
  /** `measurand|edge` → [n, Σx, Σx²] (and sorted values for the percentile method). */
  readonly population: Readonly<Record<string, PopulationCell>>;
  readonly baselines: Readonly<Partial<Record<Measurand, BaselineBucket>>>;
}

export interface PopulationCell {
  readonly n: number;
  readonly sum: number;
  readonly sumSq: number;
  readonly values?: readonly number[];
}

export const EMPTY_BUCKET: MonthBucket = { population: {}, baselines: {} };

/** A sample's share of the population statistics: `measurand|edge` → value; null when it has none (no oil hours, below the first edge). */
export function populationShare(sample: Sample, settings: ComponentSettings): Record<string, number> | null {
  const edges = bandEdges(settings.population);
  const oilHours = sample.oilHours;
  if (oilHours === undefined || !(oilHours >= edges[0]!)) return null;
  const edge = edges.filter((e) => oilHours >= e).at(-1)!;
  const out: Record<string, number> = {};
  let any = false;
  for (const m of populationMeasurands(settings.population)) {
    const reading = sample.readings[m];
    const v = reading && readingNumber(reading);
    if (v === undefined) continue;
    out[`${m}|${edge}`] = v;
    any = true;
  }
  return any ? out : null;
}

/** One component's baseline as a bucket entry; null when it cannot be pooled (no hours). */
export function baselineBucketOf(sums: BaselineSums): BaselineBucket | null {
  if (!(sums.sumHours > 0)) return null;
  const r = sums.sumIncrement / sums.sumHours;
  const log = r > 0 ? Math.log(r) : 0;
  return { components: 1, sums, sumRate: r, sumRateSq: r * r, positive: r > 0 ? 1 : 0, sumLog: log, sumLogSq: log * log };
}

/** Adds (sign 1) or takes out (sign −1) one population share. */
export function addPopulation(bucket: Record<string, PopulationCell>, values: Readonly<Record<string, number>>, sign: 1 | -1, keepValues: boolean): void {
  for (const [field, v] of Object.entries(values)) {
    const cell = bucket[field] ?? { n: 0, sum: 0, sumSq: 0 };
    const next: PopulationCell = { n: cell.n + sign, sum: cell.sum + sign * v, sumSq: cell.sumSq + sign * v * v };
    let values2 = cell.values;
    if (keepValues || values2 !== undefined) {
      const list = [...(values2 ?? [])];
      if (sign > 0) {
        const at = list.findIndex((x) => x > v);
        list.splice(at < 0 ? list.length : at, 0, v);
      } else {
        const at = list.indexOf(v);
        if (at >= 0) list.splice(at, 1);
      }
      values2 = list;
    }
    if (next.n <= 0) delete bucket[field];
    else bucket[field] = values2 === undefined ? next : { ...next, values: values2 };
  }
}

export function addBaseline(a: BaselineBucket | undefined, b: BaselineBucket, sign: 1 | -1): BaselineBucket | undefined {
  const base = a ?? { components: 0, sums: EMPTY_SUMS, sumRate: 0, sumRateSq: 0, positive: 0, sumLog: 0, sumLogSq: 0 };
  const components = base.components + sign * b.components;
  if (components <= 0) return undefined;
  const s = (x: number, y: number) => x + sign * y;
  return {
    components,
    sums: {
      intervals: s(base.sums.intervals, b.sums.intervals),
      sumHours: s(base.sums.sumHours, b.sums.sumHours),
      sumHoursSq: s(base.sums.sumHoursSq, b.sums.sumHoursSq),
      sumIncrement: s(base.sums.sumIncrement, b.sums.sumIncrement),
      sumIncrementSq: s(base.sums.sumIncrementSq, b.sums.sumIncrementSq),
      sumIncrementHours: s(base.sums.sumIncrementHours, b.sums.sumIncrementHours),
      sumLabVariance: s(base.sums.sumLabVariance, b.sums.sumLabVariance),
    },
    sumRate: s(base.sumRate, b.sumRate),
    sumRateSq: s(base.sumRateSq, b.sumRateSq),
    positive: base.positive + sign * b.positive,
    sumLog: s(base.sumLog, b.sumLog),
    sumLogSq: s(base.sumLogSq, b.sumLogSq),
  };
}

/** The sum of buckets (sign 1) less others (sign −1), in a fresh bucket. */
export function combineBuckets(parts: ReadonlyArray<readonly [MonthBucket, 1 | -1]>, keepValues: boolean): MonthBucket {
  const population: Record<string, PopulationCell> = {};
  const baselines: Partial<Record<Measurand, BaselineBucket>> = {};
  for (const [bucket, sign] of parts) {
    for (const [field, cell] of Object.entries(bucket.population)) {
      const cur = population[field] ?? { n: 0, sum: 0, sumSq: 0 };
      let values = cur.values;
      if (keepValues && cell.values !== undefined) {
        if (sign > 0) values = [...(values ?? []), ...cell.values].sort((x, y) => x - y);
        else {
          const list = [...(values ?? [])];
          for (const v of cell.values) {
            const at = list.indexOf(v);
            if (at >= 0) list.splice(at, 1);
          }
          values = list;
        }
      }
      const next = { n: cur.n + sign * cell.n, sum: cur.sum + sign * cell.sum, sumSq: cur.sumSq + sign * cell.sumSq };
      population[field] = values === undefined ? next : { ...next, values };
    }
    for (const [m, b] of Object.entries(bucket.baselines) as [Measurand, BaselineBucket][]) {
      const next = addBaseline(baselines[m], b, sign);
      if (next === undefined) delete baselines[m];
      else baselines[m] = next;
    }
  }
  for (const [field, cell] of Object.entries(population)) if (cell.n <= 0) delete population[field];
  return { population, baselines };
}

/**
 * Summation order differs with arrival order (and Redis adds in long double), which moves the last bits of a sum.
 * Twelve significant digits is far below any lab's resolution and far above that noise, so the same results give
 * the same statistics whatever the order they came in.
 */
function settle(x: number): number {
  return x === 0 ? 0 : Number(x.toPrecision(12));
}

/** The GroupStats the analysis reads, from a combined bucket (other components, months before the one judged). */
export function groupStatsOf(group: string, bucket: MonthBucket, settings: ComponentSettings): GroupStats {
  const sums: Partial<Record<Measurand, Map<number, BandSums>>> = {};
  for (const [field, cell] of Object.entries(bucket.population)) {
    const [m, edge] = field.split('|') as [Measurand, string];
    let byEdge = sums[m];
    if (byEdge === undefined) sums[m] = byEdge = new Map();
    byEdge.set(Number(edge), { n: cell.n, sum: settle(cell.sum), sumSq: settle(cell.sumSq), ...(cell.values && { values: cell.values }) });
  }
  const baselines: Partial<Record<Measurand, RateBaseline>> = {};
  for (const m of settings.detection.measurands) {
    const b = bucket.baselines[m];
    if (b === undefined) continue;
    const pooledSums = settledSums(b.sums);
    const pooled = rateBaseline(pooledSums, b.components, settings.detection.budget.sampleIntervalHours);
    if (pooled === undefined) continue;
    if (b.components < 2) {
      baselines[m] = pooled;
      continue;
    }
    const n = b.components;
    const spread = Math.max(0, (settle(b.sumRateSq) - settle(b.sumRate) ** 2 / n) / (n - 1));
    const peers =
      b.positive >= 2
        ? {
            components: b.positive,
            meanLogRate: settle(b.sumLog) / b.positive,
            sdLogRate: Math.sqrt(Math.max(0, (settle(b.sumLogSq) - settle(b.sumLog) ** 2 / b.positive) / (b.positive - 1))),
          }
        : undefined;
    const within = withinProcessVariance(pooledSums, n, settle(b.sumRate), settle(b.sumRateSq));
    baselines[m] = { ...pooled, rateVariance: spread, ...(peers && { peers }), ...(within && { within }) };
  }
  return { group, bands: bandStatsFromSums(sums, settings.population), baselines };
}

function settledSums(s: BaselineSums): BaselineSums {
  return {
    intervals: Math.round(s.intervals),
    sumHours: settle(s.sumHours),
    sumHoursSq: settle(s.sumHoursSq),
    sumIncrement: settle(s.sumIncrement),
    sumIncrementSq: settle(s.sumIncrementSq),
    sumIncrementHours: settle(s.sumIncrementHours),
    sumLabVariance: settle(s.sumLabVariance),
  };
}

/** A baseline share as a bucket: the month it was complete in, and its entry. */
export function baselineShareBucket(shares: Readonly<Partial<Record<Measurand, BaselineShare>>>): Map<string, MonthBucket> {
  const out = new Map<string, { population: Record<string, PopulationCell>; baselines: Partial<Record<Measurand, BaselineBucket>> }>();
  for (const [m, share] of Object.entries(shares) as [Measurand, BaselineShare][]) {
    const entry = baselineBucketOf(share.sums);
    if (entry === null) continue;
    let bucket = out.get(share.month);
    if (bucket === undefined) out.set(share.month, (bucket = { population: {}, baselines: {} }));
    bucket.baselines[m] = entry;
  }
  return out;
}
