/**
 * The trend chart of one measurand of one component, as an SVG string: the readings per oil charge with the fixed
 * and population limits, the wear rate per interval with its rate limits, and each change detector's statistic
 * against its limit, all on one time axis, with a mark wherever a rule fired, and under the legend the caution that
 * goes with every finding (the tool advises; the lab, the maker's limits, local codes and licensed practice decide). Scales, ticks and paths come from d3;
 * the drawing is plain SVG so that the same string goes inline into the board and through resvg into an e-mail PNG.
 *
 * Visual language (ISA-101 high-performance HMI): grey data on a calm grey ground, colour only on the marks of
 * abnormal states, and every mark's severity given by its shape and its word as well as its colour.
 *
 * This file composes the chart; each panel draws itself in its own module beside it (readingsPanel, cleanlinessPanel,
 * ratePanel, cusumPanel, ewmaPanel), over the shared axes, marks, labels and legend.
 */
import { extent } from 'd3-array';
import { scaleLinear, scaleUtc, type ScaleTime } from 'd3-scale';
import type { Measurand } from '../../domain/measurands.ts';
import { escapeHtml as escapeXml } from '../../domain/safeText.ts';
import { chartAltText } from '../altText.ts';
import { advisoryLines } from './advisoryLines.ts';
import type { ComponentSeries, MarkPanel, MeasurandSeries } from '../componentSeries.ts';
import { NEUTRAL } from '../severityStyle.ts';
import { drawCodes } from './cleanlinessPanel.ts';
import { drawCusum } from './cusumPanel.ts';
import { drawEwma } from './ewmaPanel.ts';
import { drawProjection } from './forecastProjection.ts';
import { FONT, MARGIN, PANEL_GAP, type Frame } from './layout.ts';
import { legend } from './legend.ts';
import { drawMarks } from './marks.ts';
import { PanelLabels } from './panelLabels.ts';
import { panelsOf } from './panelSpecs.ts';
import { projectionOf } from './projectionOf.ts';
import { drawRates } from './ratePanel.ts';
import { drawReadings } from './readingsPanel.ts';
import { text } from './text.ts';
import { xAxis } from './xAxis.ts';
import { gridAndYAxis } from './yAxis.ts';

export interface TrendChartOptions {
  /** Width in pixels; the panels fill it. Default 760. */
  readonly width?: number;
  /** Heading above the panels. Default "unit / component — measurand (label)"; false for none (the page has its own). */
  readonly title?: string | false;
}

export const DEFAULT_CHART_WIDTH = 760;

export function renderTrendChart(series: ComponentSeries, measurand: Measurand, options: TrendChartOptions = {}): string {
  const m = series.measurands.find((s) => s.measurand === measurand);
  if (m === undefined || sampleTimes(m).length === 0) throw new RangeError(`no ${measurand} readings for ${series.unit}/${series.component}`);
  const width = Math.max(320, Math.round(options.width ?? DEFAULT_CHART_WIDTH));
  const title = options.title === undefined ? `${series.unit} / ${series.component} — ${m.measurand} (${m.label})` : options.title;

  const panels = panelsOf(m);
  let top = title === false ? 8 : 36;
  const frames = new Map<MarkPanel, Frame & { heading: string }>();
  for (const p of panels) {
    top += PANEL_GAP - 12;
    frames.set(p.key, { top, height: p.height, y: scaleLinear().domain(p.domain).nice(4).range([top + p.height, top]), heading: p.heading });
    top += p.height;
  }
  const axisBottom = top;
  // The caution under the legend: the marks' severities are advice, on the chart as wherever else findings go.
  const advisory = advisoryLines(series.advisory, axisBottom + 64, width);
  const height = axisBottom + 76 + advisory.height;

  const projection = projectionOf(m);
  const [t0, tLast] = extent(sampleTimes(m)) as [number, number];
  const t1 = Math.max(tLast, ...projection.map((p) => p.time));
  const pad = Math.max((t1 - t0) * 0.02, 86_400_000);
  const x = scaleUtc()
    .domain([new Date(t0 - pad), new Date(t1 + pad)])
    .range([MARGIN.left, width - MARGIN.right]);
  const xTicks = x.ticks(Math.max(2, Math.floor((width - MARGIN.left - MARGIN.right) / 110)));

  const alt = chartAltText(series, measurand);
  const out: string[] = [
    `<svg xmlns="http://www.w3.org/2000/svg" width="${width}" height="${height}" viewBox="0 0 ${width} ${height}" role="img" aria-label="${escapeXml(alt)}" font-family="${FONT}" font-size="13" data-measurand="${escapeXml(m.measurand)}">`,
    `<title>${escapeXml(title === false ? `${series.unit} / ${series.component} — ${m.measurand}` : title)}</title>`,
    `<desc>${escapeXml(`${alt} ${series.advisory}`)}</desc>`,
    `<rect width="${width}" height="${height}" fill="${NEUTRAL.background}"/>`,
  ];
  if (title !== false) out.push(text(MARGIN.left, 24, title, { size: 17, weight: 'bold' }));

  for (const [key, f] of frames) {
    out.push(`<g data-panel="${key}">`);
    out.push(`<rect x="${MARGIN.left}" y="${f.top}" width="${width - MARGIN.left - MARGIN.right}" height="${f.height}" fill="${NEUTRAL.panel}"/>`);
    out.push(text(MARGIN.left, f.top - 7, f.heading, { size: 13, weight: 'bold', fill: NEUTRAL.mutedText }));
    const labels = new PanelLabels(f, width);
    out.push(...gridAndYAxis(f, x, xTicks, width));
    out.push(...drawPanel(key, m, x, f, width, labels));
    if (key === 'readings' && projection.length > 0) out.push(...drawProjection(m, projection, series.forecast?.percentiles ?? [10, 90], x, f, labels));
    out.push(...drawMarks(m, key, x, f, width, labels));
    out.push(...labels.render());
    out.push('</g>');
  }
  out.push(...xAxis(x, xTicks, axisBottom));
  out.push(...legend(axisBottom + 44, width, projection.length > 0 ? m.forecast?.projection.length ?? 0 : 0));
  out.push(...advisory.svg);
  out.push('</svg>');
  return out.join('\n');
}

/** Times of every sample that has a reading of the measurand. */
function sampleTimes(m: MeasurandSeries): number[] {
  return [...m.charges.flatMap((c) => c.points), ...(m.cleanliness?.points ?? [])].map((p) => Date.parse(p.sampledAt));
}

/** The panel of one kind of evidence, drawn by its own module. */
function drawPanel(key: MarkPanel, m: MeasurandSeries, x: ScaleTime<number, number>, f: Frame, width: number, labels: PanelLabels): string[] {
  switch (key) {
    case 'readings':
      return m.cleanliness === null ? drawReadings(m, x, f, width, labels) : drawCodes(m.cleanliness, x, f, width, labels);
    case 'rate':
      return drawRates(m, x, f, width, labels);
    case 'cusum':
      return drawCusum(m, x, f, width, labels);
    case 'ewma':
      return drawEwma(m, x, f, labels);
  }
}
