import type { ScaleTime } from 'd3-scale';
import { escapeHtml as escapeXml } from '../../domain/safeText.ts';
import type { MeasurandSeries } from '../componentSeries.ts';
import { NEUTRAL } from '../severityStyle.ts';
import { fmt } from './formatNumber.ts';
import type { Frame, Point } from './layout.ts';
import { levelLines } from './levelLines.ts';
import { path } from './linePath.ts';
import type { PanelLabels } from './panelLabels.ts';
import { r } from './round.ts';

/** The wear-rate panel: the rate per interval, one line per oil charge, against the rate limits. */
export function drawRates(m: MeasurandSeries, x: ScaleTime<number, number>, f: Frame, width: number, labels: PanelLabels): string[] {
  const rates = m.rates!;
  const out = levelLines(rates.limits, 'rate', f, width, 'rate', labels);
  const byCharge = new Map<number, Point[]>();
  for (const p of rates.points) {
    const list = byCharge.get(p.chargeIndex) ?? [];
    list.push({ sampleId: p.sampleId, time: Date.parse(p.sampledAt), value: p.per100h });
    byCharge.set(p.chargeIndex, list);
  }
  for (const [charge, pts] of byCharge) out.push(path(pts, x, f.y, { stroke: NEUTRAL.data, width: 1.4 }, `data-charge="${charge}"`));
  for (const p of rates.points) {
    const hollow = p.censored || p.runningIn;
    const [px, py] = [r(x(Date.parse(p.sampledAt))), r(f.y(p.per100h))];
    const note = p.runningIn ? ' (running in, not judged)' : p.censored ? ' (censored reading: a bound only)' : '';
    out.push(
      `<circle cx="${px}" cy="${py}" r="${hollow ? 3.2 : 2.4}" fill="${hollow ? NEUTRAL.panel : NEUTRAL.data}" stroke="${NEUTRAL.data}" stroke-width="1.2"><title>${escapeXml(`${p.sampleId}: ${fmt(p.per100h)} ${m.unit}/100 h over ${fmt(p.hours)} h${note}`)}</title></circle>`,
    );
  }
  return out;
}
