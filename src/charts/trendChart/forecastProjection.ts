import type { ScaleTime } from 'd3-scale';
import { escapeHtml as escapeXml } from '../../domain/safeText.ts';
import type { MeasurandSeries } from '../componentSeries.ts';
import { NEUTRAL } from '../severityStyle.ts';
import type { Frame } from './layout.ts';
import type { PanelLabels } from './panelLabels.ts';
import type { ProjectionAt } from './projectionOf.ts';
import { r } from './round.ts';

/**
 * The projected level from the last reading on: the central estimate dashed, the interval as a light band, so that the
 * engineer sees where the trend heads and how sure that is, not a line to take as fact.
 */
export function drawProjection(
  m: MeasurandSeries,
  points: readonly ProjectionAt[],
  [a, b]: readonly [number, number],
  x: ScaleTime<number, number>,
  f: Frame,
  labels: PanelLabels,
): string[] {
  const [lo, hi] = f.y.domain() as [number, number];
  const clamp = (v: number) => f.y(Math.min(hi, Math.max(lo, v)));
  const upper = points.map((p) => `${r(x(p.time))},${r(clamp(p.high))}`);
  const lower = [...points].reverse().map((p) => `${r(x(p.time))},${r(clamp(p.low))}`);
  const central = points.map((p, i) => `${i === 0 ? 'M' : 'L'}${r(x(p.time))},${r(clamp(p.central))}`).join('');
  const title = escapeXml(`Projection at the present trend, ${a}th–${b}th percentile band; a forecast assumes the present trend continues`);
  const last = points[points.length - 1]!;
  labels.inPlot(r(x(last.time)) - 4, r(clamp(last.central)) - 6, 'forecast', 'end', { fill: NEUTRAL.mutedText });
  return [
    `<g data-forecast="${escapeXml(m.measurand)}"><title>${title}</title>`,
    `<polygon data-forecast-band="${a}-${b}" points="${[...upper, ...lower].join(' ')}" fill="${NEUTRAL.band}" fill-opacity="0.28" stroke="none"/>`,
    `<path data-forecast-central="true" d="${central}" fill="none" stroke="${NEUTRAL.data}" stroke-width="1.6" stroke-dasharray="5 4"/>`,
    '</g>',
  ];
}
