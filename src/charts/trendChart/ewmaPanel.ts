import type { ScaleTime } from 'd3-scale';
import type { MeasurandSeries } from '../componentSeries.ts';
import { NEUTRAL } from '../severityStyle.ts';
import { fmt } from './formatNumber.ts';
import type { Frame } from './layout.ts';
import { path } from './linePath.ts';
import { lives } from './lives.ts';
import type { PanelLabels } from './panelLabels.ts';

/** The EWMA panel: the statistic per detector life against its control limits, which step as the limits widen. */
export function drawEwma(m: MeasurandSeries, x: ScaleTime<number, number>, f: Frame, labels: PanelLabels): string[] {
  const e = m.ewma!;
  const out: string[] = [];
  for (const life of lives(e.points)) {
    const pts = (key: 'ucl' | 'lcl' | 'ewma') => life.map((p) => ({ sampleId: p.sampleId, time: Date.parse(p.sampledAt), value: p[key] }));
    out.push(path(pts('ucl'), x, f.y, { stroke: NEUTRAL.limit, width: 1.5, dash: '6 3', curve: 'step' }, 'data-limit="ucl" data-kind="ewma"'));
    if (e.sided === 'two') out.push(path(pts('lcl'), x, f.y, { stroke: NEUTRAL.limit, width: 1.5, dash: '6 3', curve: 'step' }, 'data-limit="lcl" data-kind="ewma"'));
    out.push(path(pts('ewma'), x, f.y, { stroke: NEUTRAL.data, width: 1.6 }, 'data-statistic="ewma"'));
  }
  const last = e.points[e.points.length - 1];
  if (last) {
    labels.right(f.y(last.ucl), `limit ${fmt(last.ucl)}`);
    if (e.sided === 'two') labels.right(f.y(last.lcl), `limit ${fmt(last.lcl)}`);
  }
  return out;
}
