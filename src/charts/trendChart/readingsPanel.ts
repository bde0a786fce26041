/** The readings panel: the values per oil charge, where each charge starts, the fixed and group limits and the oil-condition levels. */
import type { ScaleTime } from 'd3-scale';
import { escapeHtml as escapeXml } from '../../domain/safeText.ts';
import type { MeasurandSeries } from '../componentSeries.ts';
import { NEUTRAL } from '../severityStyle.ts';
import type { Frame } from './layout.ts';
import { conditionLines, levelLines } from './levelLines.ts';
import { path } from './linePath.ts';
import type { PanelLabels } from './panelLabels.ts';
import { populationLines } from './populationLines.ts';
import { r } from './round.ts';

export function drawReadings(m: MeasurandSeries, x: ScaleTime<number, number>, f: Frame, width: number, labels: PanelLabels): string[] {
  const out: string[] = [];
  const starts = m.charges.filter((c) => c.index > 0 && c.points.length > 0);
  const labelled = spacing(starts.map((c) => x(Date.parse(c.points[0]!.sampledAt)))) > 80;
  for (const c of starts) {
    const px = r(x(Date.parse(c.points[0]!.sampledAt)) - 4);
    out.push(`<line data-charge-start="${c.index}" x1="${px}" x2="${px}" y1="${f.top}" y2="${f.top + f.height}" stroke="${NEUTRAL.band}" stroke-dasharray="2 3"/>`);
    if (labelled) labels.inPlot(px + 3, f.top + 12, c.startedBy === 'componentChanged' ? 'component change' : 'oil change', 'start', { fill: NEUTRAL.mutedText });
  }
  out.push(...levelLines(m.limits, 'fixed', f, width, 'limit', labels));
  out.push(...conditionLines(m.conditionLevels, f, width, labels));
  out.push(...populationLines(m, x, f, width, labels));
  for (const c of m.charges) {
    const pts = c.points.map((p) => ({ sampleId: p.sampleId, time: Date.parse(p.sampledAt), value: p.value }));
    out.push(path(pts, x, f.y, { stroke: NEUTRAL.data, width: 1.8 }, `data-charge="${c.index}"`));
    for (const p of c.points) {
      const [px, py] = [r(x(Date.parse(p.sampledAt))), r(f.y(p.value))];
      out.push(
        p.censored
          ? `<circle data-censored="true" cx="${px}" cy="${py}" r="3.5" fill="${NEUTRAL.panel}" stroke="${NEUTRAL.data}" stroke-width="1.4"><title>${escapeXml(`${p.sampleId}: ${p.text}`)}</title></circle>`
          : `<circle cx="${px}" cy="${py}" r="2.6" fill="${NEUTRAL.data}"><title>${escapeXml(`${p.sampleId}: ${p.text} ${m.unit}`)}</title></circle>`,
      );
    }
  }
  return out;
}

/** The smallest gap between neighbouring positions; Infinity with fewer than two. */
function spacing(xs: number[]): number {
  const sorted = [...xs].sort((a, b) => a - b);
  let gap = Infinity;
  for (let i = 1; i < sorted.length; i++) gap = Math.min(gap, sorted[i]! - sorted[i - 1]!);
  return gap;
}
