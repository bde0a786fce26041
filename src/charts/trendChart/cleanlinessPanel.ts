/** The readings panel of an ISO 4406 cleanliness code. */
import type { ScaleTime } from 'd3-scale';
import { escapeHtml as escapeXml } from '../../domain/safeText.ts';
import type { CleanlinessSeries } from '../componentSeries.ts';
import { NEUTRAL } from '../severityStyle.ts';
import { MARGIN, type Frame } from './layout.ts';
import { path } from './linePath.ts';
import type { PanelLabels } from './panelLabels.ts';
import { r } from './round.ts';

const SIZE_RANGES = [
  { key: 'p4', label: '≥4 µm', dash: '' },
  { key: 'p6', label: '≥6 µm', dash: '5 2' },
  { key: 'p14', label: '≥14 µm', dash: '1.5 2.5' },
] as const;

/** One line per size range, each with its own dash pattern and name, against the target's scale numbers. */
export function drawCodes(c: CleanlinessSeries, x: ScaleTime<number, number>, f: Frame, width: number, labels: PanelLabels): string[] {
  const out: string[] = [];
  for (const range of SIZE_RANGES) {
    const target = c.target?.[range.key];
    if (target !== undefined && target !== null) {
      const y = r(f.y(target));
      out.push(
        `<line data-limit="target" data-kind="cleanliness" data-size="${range.key}" data-value="${target}" x1="${MARGIN.left}" x2="${width - MARGIN.right}" y1="${y}" y2="${y}" stroke="${NEUTRAL.limit}" stroke-width="1.4" stroke-dasharray="4 3"/>`,
      );
      labels.inPlot(MARGIN.left + 4, y - 3, `target ${range.label} ${target}`, 'start', { fill: NEUTRAL.mutedText, halo: true });
    }
    const pts = c.points.map((p) => ({ sampleId: p.sampleId, time: Date.parse(p.sampledAt), value: p.code[range.key] ?? NaN }));
    if (pts.every((p) => Number.isNaN(p.value))) continue;
    out.push(path(pts, x, f.y, { stroke: NEUTRAL.data, width: 1.6, ...(range.dash && { dash: range.dash }) }, `data-size="${range.key}"`));
    for (const p of pts.filter((q) => !Number.isNaN(q.value))) {
      out.push(`<circle cx="${r(x(p.time))}" cy="${r(f.y(p.value))}" r="2.4" fill="${NEUTRAL.data}"><title>${escapeXml(`${p.sampleId}: ${range.label} scale number ${p.value}`)}</title></circle>`);
    }
    const last = [...pts].reverse().find((p) => !Number.isNaN(p.value))!;
    labels.right(f.y(last.value), `${range.label} ${last.value}`);
  }
  return out;
}
