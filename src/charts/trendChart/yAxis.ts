import type { ScaleTime } from 'd3-scale';
import { NEUTRAL } from '../severityStyle.ts';
import { MARGIN, type Frame } from './layout.ts';
import { r } from './round.ts';
import { text } from './text.ts';

/** The vertical grid at the time ticks and the labelled value ticks of one panel. */
export function gridAndYAxis(f: Frame, x: ScaleTime<number, number>, xTicks: Date[], width: number): string[] {
  const out: string[] = [];
  const [bottom, top] = [f.top + f.height, f.top];
  for (const t of xTicks) out.push(`<line x1="${r(x(t))}" x2="${r(x(t))}" y1="${top}" y2="${bottom}" stroke="${NEUTRAL.grid}"/>`);
  const format = f.y.tickFormat(4);
  for (const v of f.y.ticks(4)) {
    const y = r(f.y(v));
    out.push(`<g class="tick" data-axis="y" data-value="${v}">`);
    out.push(`<line x1="${MARGIN.left}" x2="${width - MARGIN.right}" y1="${y}" y2="${y}" stroke="${v === 0 ? NEUTRAL.axis : NEUTRAL.grid}"/>`);
    out.push(text(MARGIN.left - 6, y + 4, format(v), { anchor: 'end', fill: NEUTRAL.mutedText, size: 12 }));
    out.push('</g>');
  }
  return out;
}
