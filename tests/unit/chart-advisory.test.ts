/**
 * The caution goes wherever findings go (src/domain/caution.ts): the series model (the body of GET …/series) carries
 * it at its top even when forecasts are disabled, and every trend chart says it in words a reader sees and in its
 * description, also as a PNG, and at the narrowest width the API draws.
 */
import { PNG } from 'pngjs';
import { DomUtils, parseDocument } from 'htmlparser2';
import { describe, expect, it } from 'vitest';
import { evaluateComponent } from '../../src/analysis/evaluate.ts';
import { renderChartPng } from '../../src/charts/chartPng.ts';
import { buildComponentSeries } from '../../src/charts/componentSeries.ts';
import { MARGIN } from '../../src/charts/trendChart/layout.ts';
import { textWidth } from '../../src/charts/trendChart/textWidth.ts';
import { renderTrendChart } from '../../src/charts/trendChart/trendChart.ts';
import { ADVISORY_CAUTION } from '../../src/domain/caution.ts';
import { CONFIG, fixtureGroup, fixtureSamples } from './chart-fixtures.ts';
import { settingsFrom } from './history-fixtures.ts';

const settings = settingsFrom(`${CONFIG}forecast:\n  enabled: false\n`);
const group = fixtureGroup();
const series = buildComponentSeries(evaluateComponent(fixtureSamples(), settings, group), settings, group);

function advisoryOf(svg: string) {
  const doc = parseDocument(svg, { xmlMode: true });
  const find = (test: (e: ReturnType<typeof DomUtils.findAll>[number]) => boolean) => DomUtils.findAll(test, doc.children);
  const root = find((e) => e.name === 'svg')[0]!;
  const lines = find((e) => e.name === 'g' && e.attribs['data-advisory'] === 'caution').flatMap((g) => DomUtils.findAll((e) => e.name === 'text', [g]));
  const legend = find((e) => e.name === 'g' && e.attribs['data-legend'] === 'severity')[0]!;
  const legendY = Math.max(...DomUtils.findAll((e) => e.name === 'text', [legend]).map((t) => Number(t.attribs.y)));
  return {
    width: Number(root.attribs.width),
    height: Number(root.attribs.height),
    desc: DomUtils.textContent(find((e) => e.name === 'desc')[0]!),
    lines: lines.map((t) => ({ text: DomUtils.textContent(t), x: Number(t.attribs.x), y: Number(t.attribs.y), size: Number(t.attribs['font-size']) })),
    legendY,
  };
}

describe('the caution beside the findings of the series and the charts', () => {
  it('the series carries the caution at its top with forecasts disabled, beside marks with severities', () => {
    expect(series.forecast).toBeNull();
    const marks = series.measurands.flatMap((m) => m.marks);
    expect(marks.some((k) => k.severity === 'alarm')).toBe(true);
    expect(series.advisory).toBe(ADVISORY_CAUTION);
  });

  it.each([320, 760, 2000])('a chart %i px wide shows the whole caution below its legend, inside the picture, and in its description', (width) => {
    const got = advisoryOf(renderTrendChart(series, 'Fe', { width, title: false }));
    expect(got.width).toBe(width);
    expect(got.lines.map((l) => l.text).join(' ')).toBe(ADVISORY_CAUTION);
    for (const l of got.lines) {
      expect(l.y).toBeGreaterThan(got.legendY);
      expect(l.y).toBeLessThan(got.height);
      expect(l.x + textWidth(l.text, l.size)).toBeLessThanOrEqual(width);
    }
    expect(got.desc.endsWith(ADVISORY_CAUTION)).toBe(true);
  });

  it('the PNG shows the caution: text ink in the band below the legend', () => {
    const svg = renderTrendChart(series, 'Fe', { width: 600 });
    const got = advisoryOf(svg);
    const png = PNG.sync.read(renderChartPng(svg, 600));
    const [y0, y1] = [got.legendY + 6, got.height];
    let ink = 0;
    for (let y = y0; y < y1; y++) {
      for (let x = MARGIN.left; x < png.width; x++) {
        const i = (y * png.width + x) * 4;
        if (png.data[i]! + png.data[i + 1]! + png.data[i + 2]! < 3 * 140) ink++;
      }
    }
    expect(ink).toBeGreaterThan(200);
  });
});
