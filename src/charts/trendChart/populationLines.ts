import type { ScaleTime } from 'd3-scale';
import type { MeasurandSeries } from '../componentSeries.ts';
import { NEUTRAL } from '../severityStyle.ts';
import { fmt } from './formatNumber.ts';
import { MARGIN, type Frame } from './layout.ts';
import type { PanelLabels } from './panelLabels.ts';
import { readingsHeading } from './readingsHeading.ts';
import { r } from './round.ts';
import { text } from './text.ts';
import { textWidth } from './textWidth.ts';

/** The group's caution and alarm levels at each judged reading, or a note that the group has too few results yet. */
export function populationLines(m: MeasurandSeries, x: ScaleTime<number, number>, f: Frame, width: number, labels: PanelLabels): string[] {
  if (m.population === null || m.population.length === 0) return [];
  const out: string[] = [];
  const [, hi] = f.y.domain() as [number, number];
  for (const level of ['caution', 'alarm'] as const) {
    const pts = m.population.map((p) => ({
      sampleId: p.sampleId,
      time: Date.parse(p.sampledAt),
      value: p.status.kind === 'limits' && p.status[level] <= hi ? p.status[level] : NaN,
    }));
    if (pts.every((p) => Number.isNaN(p.value))) continue;
    // The band (and so the limit) changes with the oil hours of each sample: a short level at every judged reading.
    const d = pts.filter((p) => !Number.isNaN(p.value)).map((p) => `M${r(x(p.time) - 7)},${r(f.y(p.value))}h14`).join('');
    out.push(`<path data-limit="${level}" data-kind="population" d="${d}" fill="none" stroke="${NEUTRAL.band}" stroke-width="${level === 'alarm' ? 2.4 : 1.8}"/>`);
    const last = [...pts].reverse().find((p) => !Number.isNaN(p.value));
    if (last) labels.right(f.y(last.value), `group ${level} ${fmt(last.value)}`, { fill: NEUTRAL.mutedText });
  }
  const latest = m.population[m.population.length - 1]!;
  if (latest.status.kind === 'not-enough-data') {
    const long = `group limits: not enough data (${latest.status.n} of ${latest.status.needed} results)`;
    const room = width - MARGIN.left - MARGIN.right - textWidth(readingsHeading(m), 13) - 24;
    const note = textWidth(long, 11) < room ? long : `group limits: n = ${latest.status.n} of ${latest.status.needed}`;
    out.push(text(width - MARGIN.right, f.top - 7, note, { anchor: 'end', size: 11, fill: NEUTRAL.mutedText, attrs: 'data-population="not-enough-data"' }));
  }
  return out;
}
