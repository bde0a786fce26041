import type { Levels } from '../../domain/config.ts';
import { NEUTRAL } from '../severityStyle.ts';
import { fmt } from './formatNumber.ts';
import { MARGIN, type Frame } from './layout.ts';
import type { PanelLabels } from './panelLabels.ts';
import { r } from './round.ts';

/** Horizontal caution/alarm lines labelled at the right; a level above the scale is named at the panel's top. */
export function levelLines(levels: Levels | null, kind: 'fixed' | 'rate', f: Frame, width: number, noun: string, labels: PanelLabels): string[] {
  if (levels === null) return [];
  const out: string[] = [];
  const [, hi] = f.y.domain() as [number, number];
  for (const level of ['caution', 'alarm'] as const) {
    const v = levels[level];
    if (v === undefined) continue;
    if (v > hi) {
      labels.right(f.top + 8, `${level} ${fmt(v)} ↑`, { fill: NEUTRAL.mutedText, attrs: `data-limit="${level}" data-kind="${kind}" data-off-scale="true"` });
      continue;
    }
    const y = r(f.y(v));
    out.push(
      `<line data-limit="${level}" data-kind="${kind}" data-value="${v}" x1="${MARGIN.left}" x2="${width - MARGIN.right}" y1="${y}" y2="${y}" stroke="${NEUTRAL.limit}" stroke-width="${level === 'alarm' ? 2 : 1.4}" stroke-dasharray="${level === 'alarm' ? '8 3' : '4 3'}"/>`,
    );
    labels.right(y, `${level} ${noun} ${fmt(v)}`);
  }
  return out;
}
