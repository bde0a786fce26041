/**
 * How a severity looks, on charts and on the board alike. Following the high-performance HMI guidance of
 * ANSI/ISA-101, the normal state is grey and colour is kept for abnormal states; every severity also has its own
 * shape and its word, so that it reads in grey-scale print, to colour-blind eyes and to a screen reader. Shapes gain
 * visual weight with severity: an open diamond, a solid triangle, a solid square.
 */
import { symbolDiamond, symbolSquare, symbolTriangle, type SymbolType } from 'd3-shape';
import type { Severity } from '../domain/finding.ts';

export interface SeverityStyle {
  /** The product's word for it. */
  readonly word: Severity;
  /** The same shape as a text character, for text-only places (alt text, plain lists). */
  readonly glyph: string;
  readonly symbol: SymbolType;
  /** Filled shapes are the more severe ones; watch is an outline only. */
  readonly filled: boolean;
  readonly colour: string;
}

export const SEVERITY_STYLE: Readonly<Record<Severity, SeverityStyle>> = {
  watch: { word: 'watch', glyph: '◇', symbol: symbolDiamond, filled: false, colour: '#2f5fb3' },
  caution: { word: 'caution', glyph: '▲', symbol: symbolTriangle, filled: true, colour: '#e3a21a' },
  alarm: { word: 'alarm', glyph: '■', symbol: symbolSquare, filled: true, colour: '#c8281e' },
};

/** The calm palette of everything that is not abnormal. */
export const NEUTRAL = {
  background: '#e4e4e4',
  panel: '#ededed',
  grid: '#d2d2d2',
  axis: '#6b6b6b',
  text: '#1f1f1f',
  mutedText: '#4d4d4d',
  data: '#2b2b2b',
  limit: '#5c5c5c',
  band: '#8a8a8a',
} as const;
