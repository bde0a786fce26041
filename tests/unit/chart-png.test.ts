import { PNG } from 'pngjs';
import { describe, expect, it } from 'vitest';
import { renderChartPng } from '../../src/charts/chartPng.ts';
import { renderTrendChart } from '../../src/charts/trendChart/trendChart.ts';
import { fixtureSeries } from './chart-fixtures.ts';

/** Pixels clearly darker than the chart's grey ground. */
function darkPixels(png: PNG, region?: { x0: number; y0: number; x1: number; y1: number }): number {
  const { x0, y0, x1, y1 } = region ?? { x0: 0, y0: 0, x1: png.width, y1: png.height };
  let n = 0;
  for (let y = y0; y < y1; y++) {
    for (let x = x0; x < x1; x++) {
      const i = (y * png.width + x) * 4;
      if (png.data[i]! + png.data[i + 1]! + png.data[i + 2]! < 3 * 110) n++;
    }
  }
  return n;
}

describe('chart PNG', () => {
  const { series } = fixtureSeries();
  const svg = renderTrendChart(series, 'Fe');
  const [svgWidth, svgHeight] = [/width="(\d+)"/, /height="(\d+)"/].map((re) => Number(re.exec(svg)![1]));

  it('decodes as a PNG (signature, IHDR) of the width asked and the SVG aspect ratio', () => {
    const bytes = renderChartPng(svg, 600);
    // PNG signature and the IHDR chunk that must come first (ISO/IEC 15948, sections 5.2 and 11.2.2).
    expect([...bytes.subarray(0, 8)]).toEqual([0x89, 0x50, 0x4e, 0x47, 0x0d, 0x0a, 0x1a, 0x0a]);
    expect(bytes.subarray(12, 16).toString('ascii')).toBe('IHDR');
    const png = PNG.sync.read(bytes);
    expect(png.width).toBe(600);
    expect(png.height).toBe(Math.round((600 * svgHeight!) / svgWidth!));
    expect(bytes.readUInt32BE(16)).toBe(600);
  });

  it('renders the text, from the fonts shipped with the npm package rather than the system', () => {
    // The title row holds nothing but the heading text: without a font it would stay the empty grey ground.
    const png = PNG.sync.read(renderChartPng(svg, svgWidth!));
    const titleRow = { x0: 60, y0: 8, x1: 400, y1: 30 };
    expect(darkPixels(png, titleRow)).toBeGreaterThan(300);
    const textOnly = `<svg xmlns="http://www.w3.org/2000/svg" width="200" height="40"><rect width="200" height="40" fill="#fff"/><text x="4" y="28" font-family="DejaVu Sans" font-size="24">Fe 12 ppm</text></svg>`;
    expect(darkPixels(PNG.sync.read(renderChartPng(textOnly, 200)))).toBeGreaterThan(200);
  });

  it('shows the severity colours on the marks only', () => {
    const png = PNG.sync.read(renderChartPng(svg, svgWidth!));
    let red = 0;
    for (let i = 0; i < png.data.length; i += 4) {
      const [r, g, b] = [png.data[i]!, png.data[i + 1]!, png.data[i + 2]!];
      if (r > 170 && g < 80 && b < 80) red++;
    }
    // Two alarm marks (limit and group limit) and the alarm shape in the legend: small filled squares, nothing else red.
    expect(red).toBeGreaterThan(3 * 40);
    expect(red).toBeLessThan(3 * 200);
  });

  it('refuses a width that is not a sensible pixel count', () => {
    expect(() => renderChartPng(svg, 0)).toThrow(/PNG width/);
    expect(() => renderChartPng(svg, 600.5)).toThrow(/PNG width/);
  });
});
