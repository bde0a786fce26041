import { escapeHtml as escapeXml } from '../../domain/safeText.ts';
import { NEUTRAL } from '../severityStyle.ts';
import { r } from './round.ts';

/** One SVG text element: the words escaped, the position rounded, the ink grey unless told otherwise. */
export function text(
  x: number,
  y: number,
  content: string,
  o: { size?: number; weight?: 'bold' | 'normal'; anchor?: 'start' | 'middle' | 'end'; fill?: string; halo?: boolean; attrs?: string } = {},
): string {
  const attrs = [
    `x="${r(x)}"`,
    `y="${r(y)}"`,
    o.size ? `font-size="${o.size}"` : '',
    o.weight === 'bold' ? 'font-weight="bold"' : '',
    o.anchor && o.anchor !== 'start' ? `text-anchor="${o.anchor}"` : '',
    `fill="${o.fill ?? NEUTRAL.text}"`,
    o.halo ? `stroke="${NEUTRAL.panel}" stroke-width="3" paint-order="stroke"` : '',
    o.attrs ?? '',
  ].filter(Boolean);
  return `<text ${attrs.join(' ')}>${escapeXml(content)}</text>`;
}
