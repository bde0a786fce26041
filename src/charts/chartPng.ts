/**
 * A chart SVG as PNG, for e-mail: most mail clients show neither inline SVG nor scripts, but every one shows an
 * inline PNG. resvg renders without a browser; its text needs fonts, and the DejaVu TrueType files come from the
 * `dejavu-fonts-ttf` npm package, so that a fresh machine renders the same pixels without any system font.
 */
import { createRequire } from 'node:module';
import { dirname, join } from 'node:path';
import { Resvg } from '@resvg/resvg-js';

const fontDir = join(dirname(createRequire(import.meta.url).resolve('dejavu-fonts-ttf/package.json')), 'ttf');
const FONT_FILES = ['DejaVuSans.ttf', 'DejaVuSans-Bold.ttf'].map((f) => join(fontDir, f));

/** Renders at `width` pixels (the height follows the SVG's aspect ratio); returns the PNG file's bytes. */
export function renderChartPng(svg: string, width: number): Buffer {
  if (!(Number.isInteger(width) && width >= 16 && width <= 8192)) throw new RangeError(`PNG width must be a whole number of pixels from 16 to 8192, got ${width}`);
  const resvg = new Resvg(svg, {
    fitTo: { mode: 'width', value: width },
    font: { loadSystemFonts: false, fontFiles: FONT_FILES, defaultFontFamily: 'DejaVu Sans', sansSerifFamily: 'DejaVu Sans' },
  });
  return resvg.render().asPng();
}
