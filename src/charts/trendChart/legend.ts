import { symbol } from 'd3-shape';
import { NEUTRAL, SEVERITY_STYLE } from '../severityStyle.ts';
import { MARGIN } from './layout.ts';
import { text } from './text.ts';

/** The severity shapes and the line styles named once below the time axis; the forecast only when one is drawn. */
export function legend(y: number, width: number, forecastPoints = 0): string[] {
  const out: string[] = [`<g data-legend="severity">`];
  let px = MARGIN.left;
  for (const style of Object.values(SEVERITY_STYLE)) {
    const shape = symbol(style.symbol, style.word === 'watch' ? 90 : 110)();
    out.push(
      `<path transform="translate(${px + 6},${y - 4})" d="${shape}" fill="${style.filled ? style.colour : NEUTRAL.panel}" stroke="${style.filled ? NEUTRAL.text : style.colour}" stroke-width="${style.filled ? 1 : 2.2}"/>`,
    );
    out.push(text(px + 17, y, style.word, { size: 12 }));
    px += 86;
  }
  px += 10;
  const item = (sample: string, label: string, w: number) => {
    out.push(sample, text(px + 30, y, label, { size: 12, fill: NEUTRAL.mutedText }));
    px += w;
  };
  item(`<line x1="${px}" x2="${px + 24}" y1="${y - 4}" y2="${y - 4}" stroke="${NEUTRAL.limit}" stroke-width="1.6" stroke-dasharray="6 3"/>`, 'limit', 78);
  item(`<line x1="${px + 5}" x2="${px + 19}" y1="${y - 4}" y2="${y - 4}" stroke="${NEUTRAL.band}" stroke-width="2.4"/>`, 'group limit', 124);
  if (forecastPoints > 0 && px + 100 < width) {
    item(
      `<g data-legend-item="forecast"><rect x="${px}" y="${y - 9}" width="24" height="10" fill="${NEUTRAL.band}" fill-opacity="0.28"/><line x1="${px}" x2="${px + 24}" y1="${y - 4}" y2="${y - 4}" stroke="${NEUTRAL.data}" stroke-width="1.6" stroke-dasharray="5 4"/></g>`,
      'forecast',
      96,
    );
  }
  if (px + 140 < width) item(`<circle cx="${px + 12}" cy="${y - 4}" r="3.5" fill="${NEUTRAL.panel}" stroke="${NEUTRAL.data}" stroke-width="1.4"/>`, 'censored or not judged', 0);
  out.push('</g>');
  return out;
}
