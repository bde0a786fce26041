import { NEUTRAL } from '../severityStyle.ts';
import { MARGIN, type Frame } from './layout.ts';
import { text } from './text.ts';
import { textWidth } from './textWidth.ts';

/** How one label is inked: its fill (the text colour by default), weight, a halo against the lines behind, extra attributes. */
export interface LabelStyle {
  readonly fill?: string;
  readonly weight?: 'bold' | 'normal';
  readonly halo?: boolean;
  readonly attrs?: string;
}

/**
 * The words of one panel, placed after its lines and marks so that they stay legible: labels in the right margin
 * are spread apart vertically, and a label inside the plot that would overlap one already placed is left out
 * (every mark keeps its shape and its tooltip; the legend names the shapes).
 */
export class PanelLabels {
  private readonly margin: { y: number; content: string; style: LabelStyle }[] = [];
  private readonly placed: { x0: number; x1: number; y0: number; y1: number }[] = [];
  private readonly inside: string[] = [];

  constructor(
    private readonly frame: Frame,
    private readonly width: number,
  ) {}

  right(y: number, content: string, style: LabelStyle = {}): void {
    this.margin.push({ y, content, style });
  }

  inPlot(x: number, y: number, content: string, anchor: 'start' | 'end', style: LabelStyle = {}): void {
    const w = textWidth(content, 11);
    // A word that would run out of the plot into the margin labels turns to the other side of its point.
    const plotRight = this.width - MARGIN.right;
    if (anchor === 'start' && x + w > plotRight) {
      x = x - 6;
      anchor = 'end';
    } else if (anchor === 'end' && x - w < MARGIN.left) {
      x = x + 6;
      anchor = 'start';
    }
    const box = { x0: anchor === 'start' ? x : x - w, x1: anchor === 'start' ? x + w : x, y0: y - 10, y1: y + 2 };
    if (this.placed.some((b) => b.x0 < box.x1 && box.x0 < b.x1 && b.y0 < box.y1 && box.y0 < b.y1)) return;
    this.placed.push(box);
    this.inside.push(text(x, y, content, { size: 11, anchor, fill: style.fill ?? NEUTRAL.text, ...style }));
  }

  render(): string[] {
    const gap = 13;
    const sorted = [...this.margin].sort((a, b) => a.y - b.y);
    const ys = sorted.map((l) => Math.min(this.frame.top + this.frame.height, Math.max(this.frame.top + 4, l.y)));
    for (let i = 1; i < ys.length; i++) ys[i] = Math.max(ys[i]!, ys[i - 1]! + gap);
    const overflow = (ys[ys.length - 1] ?? 0) - (this.frame.top + this.frame.height + 6);
    if (overflow > 0) for (let i = ys.length - 1; i >= 0; i--) ys[i] = Math.min(ys[i]! - overflow, i + 1 < ys.length ? ys[i + 1]! - gap : Infinity);
    const margin = sorted.map((l, i) => text(this.width - MARGIN.right + 6, ys[i]! + 4, l.content, { size: 11, fill: l.style.fill ?? NEUTRAL.text, ...l.style }));
    return [...margin, ...this.inside];
  }
}
