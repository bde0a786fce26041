import type { Levels } from '../../domain/config.ts';
import type { ConditionLevel } from '../componentSeries.ts';
import { NEUTRAL } from '../severityStyle.ts';
import { fmt } from './formatNumber.ts';
import { MARGIN, type Frame } from './layout.ts';
import type { PanelLabels } from './panelLabels.ts';
import { r } from './round.ts';

/** One horizontal level: its severity, value, and which way a reading crosses it. */
type LevelLine = Pick<ConditionLevel, 'severity' | 'level' | 'side'>;

/** Horizontal caution/alarm lines labelled at the right; a level above the scale is named at the panel's top. */
export function levelLines(levels: Levels | null, kind: 'fixed' | 'rate', f: Frame, width: number, noun: string, labels: PanelLabels): string[] {
  if (levels === null) return [];
  const lines = (['caution', 'alarm'] as const).flatMap((severity) => {
    const level = levels[severity];
    return level === undefined ? [] : [{ severity, level, side: 'above' as const }];
  });
  return drawLevels(lines, kind, f, width, noun, labels);
}

/**
 * The oil-condition levels (water, TBN, viscosity, …) drawn like the fixed limits; a level below the scale is named at
 * the panel's bottom, one above it at the top.
 */
export function conditionLines(levels: readonly ConditionLevel[], f: Frame, width: number, labels: PanelLabels): string[] {
  return drawLevels(levels, 'condition', f, width, 'level', labels);
}

function drawLevels(lines: readonly LevelLine[], kind: 'fixed' | 'rate' | 'condition', f: Frame, width: number, noun: string, labels: PanelLabels): string[] {
  const out: string[] = [];
  const [lo, hi] = f.y.domain() as [number, number];
  for (const { severity, level: v, side } of lines) {
    const sideAttr = kind === 'condition' ? ` data-side="${side}"` : '';
    if (v > hi || v < lo) {
      const above = v > hi;
      labels.right(above ? f.top + 8 : f.top + f.height - 4, `${severity} ${fmt(v)} ${above ? '↑' : '↓'}`, {
        fill: NEUTRAL.mutedText,
        attrs: `data-limit="${severity}" data-kind="${kind}"${sideAttr} data-off-scale="true"`,
      });
      continue;
    }
    const y = r(f.y(v));
    out.push(
      `<line data-limit="${severity}" data-kind="${kind}"${sideAttr} data-value="${v}" x1="${MARGIN.left}" x2="${width - MARGIN.right}" y1="${y}" y2="${y}" stroke="${NEUTRAL.limit}" stroke-width="${severity === 'alarm' ? 2 : 1.4}" stroke-dasharray="${severity === 'alarm' ? '8 3' : '4 3'}"/>`,
    );
    labels.right(y, `${severity} ${noun} ${fmt(v)}`);
  }
  return out;
}
