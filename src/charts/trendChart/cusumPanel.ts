import type { ScaleTime } from 'd3-scale';
import type { MeasurandSeries } from '../componentSeries.ts';
import { NEUTRAL } from '../severityStyle.ts';
import { fmt } from './formatNumber.ts';
import { MARGIN, type Frame } from './layout.ts';
import { path } from './linePath.ts';
import { lives } from './lives.ts';
import type { PanelLabels } from './panelLabels.ts';
import { r } from './round.ts';

/** The CUSUM panel: the upper (and, two-sided, the mirrored lower) statistic per detector life against ±h. */
export function drawCusum(m: MeasurandSeries, x: ScaleTime<number, number>, f: Frame, width: number, labels: PanelLabels): string[] {
  const c = m.cusum!;
  const out: string[] = [];
  const two = c.sided === 'two';
  for (const [sign, label] of two ? ([[1, 'h'], [-1, '−h']] as const) : ([[1, 'h']] as const)) {
    const y = r(f.y(sign * c.h));
    out.push(
      `<line data-limit="decision-interval" data-kind="cusum" data-value="${sign * c.h}" x1="${MARGIN.left}" x2="${width - MARGIN.right}" y1="${y}" y2="${y}" stroke="${NEUTRAL.limit}" stroke-width="1.6" stroke-dasharray="6 3"/>`,
    );
    labels.right(y, sign > 0 ? `${label} = ${fmt(c.h)}` : label);
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
