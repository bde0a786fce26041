import type { MeasurandSeries } from '../componentSeries.ts';

/** Names the measurand, so that a chart shown without its title (the board's cards) still says what it shows. */
export function readingsHeading(m: MeasurandSeries): string {
  const name = m.label.toLowerCase() === m.measurand.toLowerCase() ? m.measurand : `${m.measurand} (${m.label})`;
  return `${name} per oil charge, ${m.unit}`;
}
