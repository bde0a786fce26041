import type { ScaleTime } from 'd3-scale';
import type { MeasurandSeries } from '../componentSeries.ts';
import { NEUTRAL } from '../severityStyle.ts';
import { fmt } from './formatNumber.ts';
import { MARGIN, type Frame } from './layout.ts';
import { path } from './linePath.ts';
import { lives } from './lives.ts';
import type { PanelLabels } from './panelLabels.ts';
import { r } from './round.ts';

/** The CUSUM panel: the upper (and, two-sided, the mirrored lower) statistic per detector life against h (and −h of the fall side). */
export function drawCusum(m: MeasurandSeries, x: ScaleTime<number, number>, f: Frame, width: number, labels: PanelLabels): string[] {
  const c = m.cusum!;
  const out: string[] = [];
  const two = c.sided === 'two';
  for (const [value, label] of two ? ([[c.h, 'h'], [-c.hFall, '−h (fall)']] as const) : ([[c.h, 'h']] as const)) {
    const y = r(f.y(value));
    out.push(
      `<line data-limit="decision-interval" data-kind="cusum" data-value="${value}" x1="${MARGIN.left}" x2="${width - MARGIN.right}" y1="${y}" y2="${y}" stroke="${NEUTRAL.limit}" stroke-width="1.6" stroke-dasharray="6 3"/>`,
    );
    labels.right(y, `${label} = ${fmt(Math.abs(value))}`);
  }
  for (const life of lives(c.points)) {
    out.push(path(life.map((p) => ({ sampleId: p.sampleId, time: Date.parse(p.sampledAt), value: p.upper })), x, f.y, { stroke: NEUTRAL.data, width: 1.6 }, 'data-statistic="upper"'));
    if (two) {
      out.push(
        path(life.map((p) => ({ sampleId: p.sampleId, time: Date.parse(p.sampledAt), value: -p.lower })), x, f.y, { stroke: NEUTRAL.data, width: 1.2, dash: '3 2' }, 'data-statistic="lower"'),
      );
    }
  }
  if (two) labels.inPlot(MARGIN.left + 6, f.top + f.height - 6, 'below 0: falling wear (check sampling)', 'start', { fill: NEUTRAL.mutedText });
  return out;
}
