import type { ScaleTime } from 'd3-scale';
import { utcFormat } from 'd3-time-format';
import { NEUTRAL } from '../severityStyle.ts';
import { r } from './round.ts';
import { text } from './text.ts';

/** Month names at month starts, the year at January, day and month otherwise. */
const formatDay = utcFormat('%-d %b');
const formatMonth = utcFormat('%b');
const formatYear = utcFormat('%Y');
function timeLabel(d: Date): string {
  if (d.getUTCDate() !== 1 || d.getUTCHours() !== 0) return formatDay(d);
  return d.getUTCMonth() === 0 ? formatYear(d) : formatMonth(d);
}

/** The time axis below the last panel, its ticks dated. */
export function xAxis(x: ScaleTime<number, number>, ticks: Date[], y: number): string[] {
  const [x0, x1] = x.range() as [number, number];
  const out = [`<line x1="${x0}" x2="${x1}" y1="${y}" y2="${y}" stroke="${NEUTRAL.axis}"/>`];
  for (const t of ticks) {
    const px = r(x(t));
    out.push(`<g class="tick" data-axis="x" data-value="${t.toISOString()}">`);
    out.push(`<line x1="${px}" x2="${px}" y1="${y}" y2="${y + 5}" stroke="${NEUTRAL.axis}"/>`);
    out.push(text(px, y + 19, timeLabel(t), { anchor: 'middle', fill: NEUTRAL.mutedText, size: 12 }));
    out.push('</g>');
  }
  return out;
}
