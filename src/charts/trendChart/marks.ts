import { max } from 'd3-array';
import type { ScaleTime } from 'd3-scale';
import { symbol } from 'd3-shape';
import { RULE_FAMILY_LABELS } from '../../domain/finding.ts';
import { escapeHtml as escapeXml } from '../../domain/safeText.ts';
import type { MarkPanel, MeasurandSeries, RuleMark } from '../componentSeries.ts';
import { NEUTRAL, SEVERITY_STYLE } from '../severityStyle.ts';
import { codeNumbers } from './codeNumbers.ts';
import { MARGIN, STACK_STEP, type Frame } from './layout.ts';
import type { PanelLabels } from './panelLabels.ts';
import { r } from './round.ts';
import { textWidth } from './textWidth.ts';

/** Marks of one panel: at the point the rule judged, stacked upwards where several rules fired at one sample. */
export function drawMarks(m: MeasurandSeries, panel: MarkPanel, x: ScaleTime<number, number>, f: Frame, width: number, labels: PanelLabels): string[] {
  const marks = m.marks.filter((k) => k.panel === panel);
  if (marks.length === 0) return [];
  const order = new Map(m.charges.flatMap((c) => c.points).map((p, i) => [p.sampleId, i]));
  const stacked = new Map<string, number>();
  const previousRun = new Map<string, number>();
  const out: string[] = [];
  for (const mark of marks) {
    const level = stacked.get(mark.sampleId) ?? 0;
    stacked.set(mark.sampleId, level + 1);
    const [lo, hi] = f.y.domain() as [number, number];
    const anchorValue = Math.min(hi, Math.max(lo, markValue(m, mark)));
    const px = r(x(Date.parse(mark.sampledAt)));
    const py = r(Math.max(f.top + 6, f.y(anchorValue) - level * STACK_STEP));
    const style = SEVERITY_STYLE[mark.severity];
    const runKey = `${mark.rule}:${mark.severity}:${mark.direction ?? ''}`;
    const index = order.get(mark.sampleId) ?? -2;
    const continues = previousRun.get(runKey) === index - 1;
    previousRun.set(runKey, index);
    // A run of one rule's verdicts gets its word once, at its start; the later marks of the run are smaller.
    const shape = symbol(style.symbol, (mark.severity === 'watch' ? 90 : 110) * (continues ? 0.3 : 1))();
    out.push(
      `<g class="mark" data-rule="${mark.rule}" data-severity="${mark.severity}" data-sample="${escapeXml(mark.sampleId)}" transform="translate(${px},${py})">`,
      `<title>${escapeXml(`${style.word}, ${mark.rule} rule, sample ${mark.sampleId}: ${mark.explanation}`)}</title>`,
      `<path d="${shape}" fill="${style.filled ? style.colour : NEUTRAL.panel}" stroke="${style.filled ? NEUTRAL.text : style.colour}" stroke-width="${style.filled ? 1 : 2.2}"/>`,
    );
    if (!continues) {
      const label = `${style.word} · ${ruleWord(mark)}`;
      const right = px + 10 + textWidth(label, 11) < width - MARGIN.right;
      labels.inPlot(right ? px + 10 : px - 10, py + 4, label, right ? 'start' : 'end', { weight: mark.severity === 'alarm' ? 'bold' : 'normal', halo: true });
    }
    out.push('</g>');
  }
  return out;
}

function markValue(m: MeasurandSeries, mark: RuleMark): number {
  switch (mark.panel) {
    case 'readings': {
      const code = m.cleanliness?.points.find((p) => p.sampleId === mark.sampleId)?.code;
      if (code !== undefined) return max(codeNumbers(code))!;
      return m.charges.flatMap((c) => c.points).find((p) => p.sampleId === mark.sampleId)?.value ?? mark.value;
    }
    case 'rate':
      return m.rates?.points.find((p) => p.sampleId === mark.sampleId)?.per100h ?? mark.value;
    case 'cusum':
      return mark.direction === 'down' ? -mark.value : mark.value;
    case 'ewma':
      return mark.value;
  }
}

function ruleWord(mark: RuleMark): string {
  const arrow = mark.direction === 'up' ? ' ↑' : mark.direction === 'down' ? ' ↓' : '';
  return `${RULE_FAMILY_LABELS[mark.rule]}${arrow}`;
}
