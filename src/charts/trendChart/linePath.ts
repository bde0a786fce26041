import type { ScaleLinear, ScaleTime } from 'd3-scale';
import { curveStepAfter, line } from 'd3-shape';
import type { Point } from './layout.ts';

/** One series as an SVG path; a value that is not finite breaks the line. Straight segments, or steps with `curve: 'step'`. */
export function path(
  points: readonly Point[],
  x: ScaleTime<number, number>,
  y: ScaleLinear<number, number>,
  style: { stroke: string; width: number; dash?: string; curve?: 'step' },
  attrs: string,
): string {
  const generator = line<Point>()
    .defined((p) => Number.isFinite(p.value))
    .x((p) => x(p.time))
    .y((p) => y(p.value))
    .digits(1);
  if (style.curve === 'step') generator.curve(curveStepAfter);
  const d = generator(points as Point[]) ?? '';
  const dash = style.dash ? ` stroke-dasharray="${style.dash}"` : '';
  return `<path ${attrs} d="${d}" fill="none" stroke="${style.stroke}" stroke-width="${style.width}"${dash} stroke-linejoin="round"/>`;
}
