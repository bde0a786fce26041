import type { MeasurandSeries } from '../componentSeries.ts';

export interface ProjectionAt {
  readonly time: number;
  readonly central: number;
  readonly low: number;
  readonly high: number;
}

/** The forecast's projection on the time axis: only when the hours run per day place it in time. */
export function projectionOf(m: MeasurandSeries): ProjectionAt[] {
  if (m.cleanliness !== null || m.forecast === null) return [];
  return m.forecast.projection.flatMap((p) => (p.at === undefined ? [] : [{ time: Date.parse(p.at), central: p.central, low: p.low, high: p.high }]));
}
