/**
 * A fixed drawing budget for the trend chart: a history longer than `budget` samples is drawn over its latest
 * `budget` samples, every trace (readings, population limits, rates, ISO 4406 codes, CUSUM and EWMA, rule marks)
 * cut at the same instant. The detector statistics inside the window are the ones the whole history produced,
 * so nothing is recomputed on the shortened series. Drawing cost then stays bounded however long the history.
 */
import type { ComponentSeries, MeasurandSeries } from './componentSeries.ts';

export interface ChartWindow {
  readonly series: ComponentSeries;
  /** Samples of the measurand drawn, and of the whole history; equal when nothing was cut. */
  readonly shown: number;
  readonly of: number;
}

export function latestWindow(series: ComponentSeries, budget: number): ChartWindow {
  if (!Number.isInteger(budget) || budget < 1) throw new RangeError(`chart sample budget: expected a whole number above 0, got ${budget}`);
  const times = [...new Set(series.measurands.flatMap((m) => [...m.charges.flatMap((c) => c.points), ...(m.cleanliness?.points ?? [])].map((p) => Date.parse(p.sampledAt))))].sort((a, b) => a - b);
  if (times.length <= budget) return { series, shown: times.length, of: times.length };
  const from = times[times.length - budget]!;
  const keep = <T extends { readonly sampledAt: string }>(points: readonly T[]) => points.filter((p) => Date.parse(p.sampledAt) >= from);
  const cut = (m: MeasurandSeries): MeasurandSeries => ({
    ...m,
    charges: m.charges.map((c) => ({ ...c, points: keep(c.points) })).filter((c) => c.points.length > 0),
    population: m.population === null ? null : keep(m.population),
    rates: m.rates === null ? null : { ...m.rates, points: keep(m.rates.points) },
    cleanliness: m.cleanliness === null ? null : { ...m.cleanliness, points: keep(m.cleanliness.points) },
    cusum: m.cusum === null ? null : { ...m.cusum, points: keep(m.cusum.points) },
    ewma: m.ewma === null ? null : { ...m.ewma, points: keep(m.ewma.points) },
    marks: keep(m.marks),
  });
  return { series: { ...series, measurands: series.measurands.map(cut) }, shown: budget, of: times.length };
}
