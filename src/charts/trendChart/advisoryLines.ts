import { MARGIN } from './layout.ts';
import { NEUTRAL } from '../severityStyle.ts';
import { text } from './text.ts';
import { textWidth } from './textWidth.ts';

/** Size and line spacing of the caution under the legend. */
export const ADVISORY_SIZE = 11;
const LINE_HEIGHT = 14;
/** Room kept beside the estimated line width: DejaVu Sans glyphs vary about the average textWidth assumes. */
const WRAP_SLACK = 0.9;

/**
 * The caution that goes with the marks, below the legend and wrapped to the chart's width, so that a chart passed on
 * on its own (a PNG in an e-mail, an SVG opened from its address) still says that its findings advise. The first
 * baseline is at `y`; `height` is what the lines take below it.
 */
export function advisoryLines(advisory: string, y: number, width: number): { readonly svg: string[]; readonly height: number } {
  const room = (width - MARGIN.left - 8) * WRAP_SLACK;
  const lines: string[] = [];
  let line = '';
  for (const word of advisory.split(/\s+/).filter((w) => w !== '')) {
    const next = line === '' ? word : `${line} ${word}`;
    if (line !== '' && textWidth(next, ADVISORY_SIZE) > room) {
      lines.push(line);
      line = word;
    } else line = next;
  }
  if (line !== '') lines.push(line);
  const svg = [`<g data-advisory="caution">`, ...lines.map((l, i) => text(MARGIN.left, y + i * LINE_HEIGHT, l, { size: ADVISORY_SIZE, fill: NEUTRAL.mutedText })), '</g>'];
  return { svg, height: (lines.length - 1) * LINE_HEIGHT };
}
