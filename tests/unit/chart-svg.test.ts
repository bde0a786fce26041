import { Resvg } from '@resvg/resvg-js';
import { DomUtils, parseDocument } from 'htmlparser2';
import { describe, expect, it } from 'vitest';
type Element = ReturnType<typeof DomUtils.findAll>[number];

import { chartAltText } from '../../src/charts/altText.ts';
import { ADVISORY_CAUTION } from '../../src/domain/caution.ts';
import type { ComponentSeries } from '../../src/charts/componentSeries.ts';
import { renderTrendChart } from '../../src/charts/trendChart/trendChart.ts';
import { evaluateComponent } from '../../src/analysis/evaluate.ts';
import { buildComponentSeries } from '../../src/charts/componentSeries.ts';
import { fixtureSeries, fixtureSettings } from './chart-fixtures.ts';
import { sample, settingsFrom } from './history-fixtures.ts';

function parse(svg: string) {
  const doc = parseDocument(svg, { xmlMode: true });
  return { all: (test: (e: Element) => boolean) => DomUtils.findAll(test, doc.children) };
}

/** The y pixel of a value as a reader would find it: interpolated between two labelled ticks of the panel. */
function yFromTicks(panel: Element, value: number): number {
  const ticks = DomUtils.findAll((e) => e.name === 'g' && e.attribs['data-axis'] === 'y', [panel]).map((g) => {
    const line = DomUtils.findOne((e) => e.name === 'line', [g])!;
    const label = Number(DomUtils.textContent(DomUtils.findOne((e) => e.name === 'text', [g])!).replace('−', '-').replace(/,/g, ''));
    return { label, y: Number(line.attribs.y1) };
  });
  const [a, b] = [ticks[0]!, ticks[ticks.length - 1]!];
  return a.y + ((value - a.label) * (b.y - a.y)) / (b.label - a.label);
}

describe('trend chart SVG', () => {
  const { series, findings } = fixtureSeries();
  const svg = renderTrendChart(series, 'Fe');
  const { all } = parse(svg);
  const panel = (key: string) => all((e) => e.attribs['data-panel'] === key)[0]!;

  it('is well-formed SVG that resvg parses, sized as asked', () => {
    const root = all((e) => e.name === 'svg')[0]!;
    expect(root.attribs.xmlns).toBe('http://www.w3.org/2000/svg');
    expect(root.attribs.width).toBe('760');
    expect(() => new Resvg(svg)).not.toThrow();
    const narrow = parse(renderTrendChart(series, 'Fe', { width: 480 })).all((e) => e.name === 'svg')[0]!;
    expect(narrow.attribs.width).toBe('480');
  });

  it('has one panel per kind of evidence, with labelled y ticks and dated x ticks', () => {
    expect(all((e) => e.attribs['data-panel'] !== undefined).map((e) => e.attribs['data-panel'])).toEqual(['readings', 'rate', 'cusum', 'ewma']);
    for (const key of ['readings', 'rate', 'cusum', 'ewma']) {
      expect(DomUtils.findAll((e) => e.attribs['data-axis'] === 'y', [panel(key)]).length).toBeGreaterThanOrEqual(3);
    }
    const xTicks = all((e) => e.attribs['data-axis'] === 'x');
    expect(xTicks.length).toBeGreaterThanOrEqual(2);
    const times = xTicks.map((t) => Date.parse(t.attribs['data-value']!));
    // Ticks fall within the 70 days of the fixture (10 January to 21 March 2026) and in order.
    expect(times.every((t) => t >= Date.UTC(2026, 0, 1) && t <= Date.UTC(2026, 2, 31))).toBe(true);
    expect([...times].sort((a, b) => a - b)).toEqual(times);
    expect(DomUtils.textContent(DomUtils.findOne((e) => e.name === 'text', [xTicks[0]!])!)).toMatch(/^(\d{1,2} [A-Z][a-z]{2}|[A-Z][a-z]{2}|\d{4})$/);
  });

  it('draws the fixed limits at the y of their values on the reading axis', () => {
    const readings = panel('readings');
    for (const [level, value] of [['caution', 40], ['alarm', 60]] as const) {
      const line = DomUtils.findOne((e) => e.name === 'line' && e.attribs['data-kind'] === 'fixed' && e.attribs['data-limit'] === level, [readings])!;
      expect(Number(line.attribs.y1)).toBeCloseTo(yFromTicks(readings, value), 0);
      expect(line.attribs.y1).toBe(line.attribs.y2);
    }
    const rate = panel('rate');
    const caution = DomUtils.findOne((e) => e.name === 'line' && e.attribs['data-kind'] === 'rate' && e.attribs['data-limit'] === 'caution', [rate])!;
    expect(Number(caution.attribs.y1)).toBeCloseTo(yFromTicks(rate, 6), 0);
    const h = DomUtils.findOne((e) => e.name === 'line' && e.attribs['data-limit'] === 'decision-interval' && Number(e.attribs['data-value']) > 0, [panel('cusum')])!;
    expect(Number(h.attribs.y1)).toBeCloseTo(yFromTicks(panel('cusum'), series.measurands[0]!.cusum!.h), 0);
  });

  it('names a limit far above the data instead of squashing the data under it', () => {
    const far: ComponentSeries = { ...series, measurands: [{ ...series.measurands[0]!, limits: { caution: 40, alarm: 600 } }] };
    const { all: find } = parse(renderTrendChart(far, 'Fe'));
    expect(find((e) => e.name === 'line' && e.attribs['data-kind'] === 'fixed' && e.attribs['data-limit'] === 'alarm')).toHaveLength(0);
    const named = find((e) => e.name === 'text' && e.attribs['data-off-scale'] === 'true');
    expect(named.map((e) => DomUtils.textContent(e))).toEqual(['alarm 600 ↑']);
  });

  it('draws the oil-condition levels the condition rule judges by: water above its levels, TBN and viscosity below', () => {
    // Levels of the configuration below: water 500 / 1000 ppm (set here); TBN at half of new (the default
    // tbnFallFraction) and at the midpoint; viscosity 10 % / 20 % either way from new (defaults of rules/condition.ts).
    const settings = settingsFrom(`
condition:
  water: { caution: 500, alarm: 1000 }
groups:
  - name: pump-gearboxes
    newOil: { tbn: 10, v100: 14 }
`);
    const oil = [120, 300, 650, 1400].map((water, i) =>
      sample(10 * (i + 1), { oilHours: 250 * (i + 1), readings: { water, tbn: [9, 8, 7, 6.2][i]!, v100: [14.2, 14.6, 15.5, 16.1][i]! } }),
    );
    const series = buildComponentSeries(evaluateComponent(oil, settings), settings);
    const levelsOf = (m: 'water' | 'tbn' | 'v100') => series.measurands.find((s) => s.measurand === m)!.conditionLevels.map((l) => [l.severity, l.side, l.level]);
    expect(levelsOf('water')).toEqual([
      ['caution', 'above', 500],
      ['alarm', 'above', 1000],
    ]);
    expect(levelsOf('tbn')).toEqual([
      ['caution', 'below', 7.5],
      ['alarm', 'below', 5],
    ]);
    const drawn = (m: 'water' | 'tbn' | 'v100') => {
      const { all: find } = parse(renderTrendChart(series, m));
      const readings = find((e) => e.attribs['data-panel'] === 'readings')[0]!;
      const lines = DomUtils.findAll((e) => e.name === 'line' && e.attribs['data-kind'] === 'condition', [readings]);
      return { readings, lines, offScale: find((e) => e.name === 'text' && e.attribs['data-off-scale'] === 'true').map((e) => DomUtils.textContent(e)) };
    };
    const water = drawn('water');
    expect(water.lines.map((l) => l.attribs['data-limit'])).toEqual(['caution', 'alarm']);
    for (const line of water.lines) expect(Number(line.attribs.y1)).toBeCloseTo(yFromTicks(water.readings, Number(line.attribs['data-value'])), 0);
    const tbn = drawn('tbn');
    expect(tbn.lines.map((l) => [l.attribs['data-limit'], l.attribs['data-side'], Number(l.attribs['data-value'])])).toEqual([
      ['caution', 'below', 7.5],
      ['alarm', 'below', 5],
    ]);
    // Viscosity: 14 mm²/s new, so 15.4 / 16.8 above and 12.6 / 11.2 below.
    const v100 = drawn('v100');
    expect(v100.lines.map((l) => Number(l.attribs['data-value'])).sort((a, b) => a - b)).toEqual([11.2, 12.6, 15.4, 16.8]);
    expect(v100.offScale).toEqual([]);
    expect(chartAltText(series, 'water')).toContain('(caution level 500, alarm level 1000)');
  });

  it('draws the group limits where the band is trusted and says "not enough data" where it is not', () => {
    const readings = panel('readings');
    expect(DomUtils.findAll((e) => e.name === 'path' && e.attribs['data-kind'] === 'population', [readings])).toHaveLength(2);
    const note = DomUtils.findOne((e) => e.attribs['data-population'] === 'not-enough-data', [readings])!;
    expect(DomUtils.textContent(note)).toContain('not enough data (12 of 30 results)');
  });

  it('has one mark per finding, with the shape and the word of its severity', () => {
    const marks = all((e) => e.attribs.class === 'mark');
    expect(marks).toHaveLength(findings.filter((f) => f.measurand === 'Fe').length);
    const shapes = new Map<string, Set<string>>();
    for (const m of marks) {
      const severity = m.attribs['data-severity']!;
      const title = DomUtils.textContent(DomUtils.findOne((e) => e.name === 'title', [m])!);
      expect(title.startsWith(`${severity}, ${m.attribs['data-rule']} rule`)).toBe(true);
      const d = DomUtils.findOne((e) => e.name === 'path', [m])!.attribs.d!;
      shapes.set(severity, (shapes.get(severity) ?? new Set()).add(d.replace(/[\d.-]+/g, '#')));
    }
    // Each severity has its own outline (diamond, triangle, square), not just its own colour.
    const outlines = [...shapes.values()].map((s) => [...s].join('|'));
    expect(new Set(outlines).size).toBe(shapes.size);
    expect(shapes.has('alarm') && shapes.has('caution')).toBe(true);
    const words = all((e) => e.name === 'text').map((e) => DomUtils.textContent(e));
    expect(words).toContain('alarm · fixed limit');
    expect(words).toContain('caution · rate limit');
    expect(words.filter((w) => ['watch', 'caution', 'alarm'].includes(w))).toEqual(['watch', 'caution', 'alarm']); // the legend
  });

  it('carries its text alternative, and escapes names from the feed', () => {
    const root = all((e) => e.name === 'svg')[0]!;
    expect(root.attribs.role).toBe('img');
    expect(root.attribs['aria-label']).toBe(chartAltText(series, 'Fe'));
    expect(DomUtils.textContent(all((e) => e.name === 'desc')[0]!)).toBe(`${chartAltText(series, 'Fe')} ${ADVISORY_CAUTION}`);
    const odd = renderTrendChart({ ...series, unit: 'P&1 <b>' }, 'Fe');
    expect(odd).not.toContain('<b>');
    expect(() => new Resvg(odd)).not.toThrow();
  });

  it('draws a history of one censored reading: no rate, no detector, a span around the one day', () => {
    const settings = fixtureSettings();
    const one = buildComponentSeries(evaluateComponent([sample(5, { oilHours: 100, readings: { Fe: '<1' } })], settings), settings);
    const chart = parse(renderTrendChart(one, 'Fe'));
    expect(chart.all((e) => e.attribs['data-panel'] !== undefined).map((e) => e.attribs['data-panel'])).toEqual(['readings']);
    expect(chart.all((e) => e.name === 'circle' && e.attribs['data-censored'] === 'true')).toHaveLength(1);
    expect(chart.all((e) => e.attribs['data-axis'] === 'x').length).toBeGreaterThanOrEqual(1);
  });

  it('draws ISO 4406 codes as one line per size range against the target code, marking the steps worse', () => {
    const settings = settingsFrom(`groups:\n  - name: pump-gearboxes\n    cleanliness: { target: "17/15/12" }\n`);
    const samples = [
      sample(1, { readings: { iso4406: '16/14/11' } }),
      sample(2, { readings: { iso4406: '18/15/12' } }), // one step worse in the ≥4 µm range: caution (common practice)
      sample(3, { readings: { p4: 2000, p6: 900, p14: 100 } }), // 18/17/14 from the counts (ISO 4406 table): alarm
    ];
    const evaluation = evaluateComponent(samples, settings);
    const series = buildComponentSeries(evaluation, settings);
    const codes = series.measurands.find((m) => m.measurand === 'iso4406')!;
    expect(codes.cleanliness!.points.map((p) => [p.text, p.fromCounts])).toEqual([
      ['16/14/11', false],
      ['18/15/12', false],
      ['18/17/14', true],
    ]);
    const chart = parse(renderTrendChart(series, 'iso4406'));
    const panel = chart.all((e) => e.attribs['data-panel'] === 'readings')[0]!;
    expect(chart.all((e) => e.name === 'path' && e.attribs['data-size'] !== undefined)).toHaveLength(3);
    for (const [size, value] of [['p4', 17], ['p6', 15], ['p14', 12]] as const) {
      const line = chart.all((e) => e.name === 'line' && e.attribs['data-kind'] === 'cleanliness' && e.attribs['data-size'] === size)[0]!;
      expect(Number(line.attribs.y1)).toBeCloseTo(yFromTicks(panel, value), 0);
    }
    const marks = chart.all((e) => e.attribs.class === 'mark').map((e) => [e.attribs['data-sample'], e.attribs['data-severity']]);
    expect(marks).toEqual([
      ['S-0002', 'caution'],
      ['S-0003', 'alarm'],
    ]);
    expect(chartAltText(series, 'iso4406')).toContain('Latest code 18/17/14 on 2026-01-04 against the target 17/15/12.');
  });

  it('refuses a measurand the component has no readings of', () => {
    expect(() => renderTrendChart(series, 'Cu')).toThrow(/no Cu readings for PS2-P3\/gearbox/);
  });
});

describe('chart alt text', () => {
  const { series } = fixtureSeries();
  it('states the span, the latest reading against its limits and the latest findings', () => {
    const text = chartAltText(series, 'Fe');
    expect(text).toContain('Trend of Fe (iron) for PS2-P3 / gearbox: 8 readings on 2 oil charges from 2026-01-11 to 2026-03-22.');
    expect(text).toContain('Latest reading 70 ppm on 2026-03-22 (caution level 40, alarm level 60, group limits not yet known (not enough data)).');
    expect(text).toContain('Latest wear rate 10.4 ppm per 100 h.');
    expect(text).toMatch(/On the latest sample: .*alarm by the limit rule.*caution by the rate rule/);
  });
});
