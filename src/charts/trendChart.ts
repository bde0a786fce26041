/**
 * The trend chart of one measurand of one component, as an SVG string: the readings per oil charge with the fixed
 * and population limits, the wear rate per interval with its rate limits, and each change detector's statistic
 * against its limit, all on one time axis, with a mark wherever a rule fired. Scales, ticks and paths come from d3;
 * the drawing is plain SVG so that the same string goes inline into the board and through resvg into an e-mail PNG.
 *
 * Visual language (ISA-101 high-performance HMI): grey data on a calm grey ground, colour only on the marks of
 * abnormal states, and every mark's severity given by its shape and its word as well as its colour.
 */
import { extent, max, min } from 'd3-array';
import { scaleLinear, scaleUtc, type ScaleLinear, type ScaleTime } from 'd3-scale';
import { curveStepAfter, line, symbol } from 'd3-shape';
import { utcFormat } from 'd3-time-format';
import type { Levels } from '../domain/config.ts';
import { RULE_FAMILY_LABELS } from '../domain/finding.ts';
import { MEASURANDS, type Measurand } from '../domain/measurands.ts';
import { escapeHtml as escapeXml } from '../domain/safeText.ts';
import { chartAltText } from './altText.ts';
import type { Iso4406Code } from '../domain/reading.ts';
import type { CleanlinessSeries, ComponentSeries, MarkPanel, MeasurandSeries, RuleMark } from './componentSeries.ts';
import { NEUTRAL, SEVERITY_STYLE } from './severityStyle.ts';

export interface TrendChartOptions {
  /** Width in pixels; the panels fill it. Default 760. */
  readonly width?: number;
  /** Heading above the panels. Default "unit / component — measurand (label)"; false for none (the page has its own). */
  readonly title?: string | false;
}

export const DEFAULT_CHART_WIDTH = 760;

/** A level this far above the data or less is drawn; one further away is named at the panel's top instead. */
const NEAR_LIMIT = 1.6;
const FONT = 'DejaVu Sans, Verdana, Arial, sans-serif';
const MARGIN = { left: 62, right: 112 };
const PANEL_GAP = 34;
const STACK_STEP = 15;

interface Frame {
  readonly top: number;
  readonly height: number;
  readonly y: ScaleLinear<number, number>;
}

interface Point {
  readonly sampleId: string;
  readonly time: number;
  readonly value: number;
}

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
  const height = axisBottom + 62;

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
    `<desc>${escapeXml(alt)}</desc>`,
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
  out.push('</svg>');
  return out.join('\n');
}

interface PanelSpec {
  readonly key: MarkPanel;
  readonly heading: string;
  readonly height: number;
  readonly domain: [number, number];
}

/** Times of every sample that has a reading of the measurand. */
function sampleTimes(m: MeasurandSeries): number[] {
  return [...m.charges.flatMap((c) => c.points), ...(m.cleanliness?.points ?? [])].map((p) => Date.parse(p.sampledAt));
}

function panelsOf(m: MeasurandSeries): PanelSpec[] {
  if (m.cleanliness !== null) {
    const t = m.cleanliness.target;
    const numbers = [...m.cleanliness.points.flatMap((p) => codeNumbers(p.code)), ...(t === null ? [] : codeNumbers(t))];
    return [{ key: 'readings', heading: `${m.measurand}: scale number per size range (each step doubles the count)`, height: 190, domain: [(min(numbers) ?? 0) - 1, (max(numbers) ?? 1) + 1] }];
  }
  const readings = m.charges.flatMap((c) => c.points.map((p) => p.value));
  const kind = MEASURANDS[m.measurand].kind;
  const fromZero = kind === 'wear' || kind === 'contaminant';
  const populationLevels = (m.population ?? []).flatMap((p) => (p.status.kind === 'limits' ? [p.status.caution, p.status.alarm] : []));
  const projected = projectionOf(m).flatMap((p) => [p.central, p.low, p.high]);
  const panels: PanelSpec[] = [
    {
      key: 'readings',
      heading: readingsHeading(m),
      height: 170,
      domain: domainOf([...readings, ...nearLevels(m.limits, readings), ...near(populationLevels, readings), ...near(projected, readings)], fromZero),
    },
  ];
  if (m.rates !== null && m.rates.points.length > 0) {
    const rates = m.rates.points.map((p) => p.per100h);
    panels.push({ key: 'rate', heading: `${m.measurand} wear rate, ${m.unit} per 100 h`, height: 110, domain: domainOf([0, ...rates, ...nearLevels(m.rates.limits, rates)], false) });
  }
  if (m.cusum !== null && m.cusum.points.length > 0) {
    const two = m.cusum.sided === 'two';
    const hi = max([m.cusum.h, ...m.cusum.points.map((p) => p.upper)])!;
    const lo = two ? -max([m.cusum.h, ...m.cusum.points.map((p) => p.lower)])! : 0;
    panels.push({ key: 'cusum', heading: `CUSUM of the standardised wear (σ), decision interval h = ${fmt(m.cusum.h)}`, height: two ? 120 : 95, domain: [lo, hi] });
  }
  if (m.ewma !== null && m.ewma.points.length > 0) {
    const values = m.ewma.points.flatMap((p) => [p.ewma, p.ucl, p.lcl]);
    panels.push({ key: 'ewma', heading: `EWMA of the standardised wear (σ), λ = ${fmt(m.ewma.lambda)}, L = ${fmt(m.ewma.L)}`, height: 100, domain: [min(values)!, max(values)!] });
  }
  return panels;
}

/** Names the measurand, so that a chart shown without its title (the board's cards) still says what it shows. */
function readingsHeading(m: MeasurandSeries): string {
  const name = m.label.toLowerCase() === m.measurand.toLowerCase() ? m.measurand : `${m.measurand} (${m.label})`;
  return `${name} per oil charge, ${m.unit}`;
}

function domainOf(values: number[], fromZero: boolean): [number, number] {
  let lo = min(values) ?? 0;
  let hi = max(values) ?? 1;
  if (fromZero) lo = Math.min(0, lo);
  if (hi === lo) {
    hi += Math.max(1, Math.abs(hi) * 0.1);
    if (!fromZero) lo -= Math.max(1, Math.abs(lo) * 0.1);
  }
  return [lo, hi + (hi - lo) * 0.06];
}

function nearLevels(levels: Levels | null, data: number[]): number[] {
  return near([levels?.caution, levels?.alarm].filter((v): v is number => v !== undefined), data);
}

function near(levels: number[], data: number[]): number[] {
  const top = max(data) ?? 0;
  return levels.filter((v) => v <= Math.max(top, 1) * NEAR_LIMIT);
}

function gridAndYAxis(f: Frame, x: ScaleTime<number, number>, xTicks: Date[], width: number): string[] {
  const out: string[] = [];
  const [bottom, top] = [f.top + f.height, f.top];
  for (const t of xTicks) out.push(`<line x1="${r(x(t))}" x2="${r(x(t))}" y1="${top}" y2="${bottom}" stroke="${NEUTRAL.grid}"/>`);
  const format = f.y.tickFormat(4);
  for (const v of f.y.ticks(4)) {
    const y = r(f.y(v));
    out.push(`<g class="tick" data-axis="y" data-value="${v}">`);
    out.push(`<line x1="${MARGIN.left}" x2="${width - MARGIN.right}" y1="${y}" y2="${y}" stroke="${v === 0 ? NEUTRAL.axis : NEUTRAL.grid}"/>`);
    out.push(text(MARGIN.left - 6, y + 4, format(v), { anchor: 'end', fill: NEUTRAL.mutedText, size: 12 }));
    out.push('</g>');
  }
  return out;
}

/** Month names at month starts, the year at January, day and month otherwise. */
const formatDay = utcFormat('%-d %b');
const formatMonth = utcFormat('%b');
const formatYear = utcFormat('%Y');
function timeLabel(d: Date): string {
  if (d.getUTCDate() !== 1 || d.getUTCHours() !== 0) return formatDay(d);
  return d.getUTCMonth() === 0 ? formatYear(d) : formatMonth(d);
}

function xAxis(x: ScaleTime<number, number>, ticks: Date[], y: number): string[] {
  const [x0, x1] = x.range() as [number, number];
  const out = [`<line x1="${x0}" x2="${x1}" y1="${y}" y2="${y}" stroke="${NEUTRAL.axis}"/>`];
  for (const t of ticks) {
    const px = r(x(t));
    out.push(`<g class="tick" data-axis="x" data-value="${t.toISOString()}">`);
    out.push(`<line x1="${px}" x2="${px}" y1="${y}" y2="${y + 5}" stroke="${NEUTRAL.axis}"/>`);
    out.push(text(px, y + 19, timeLabel(t), { anchor: 'middle', fill: NEUTRAL.mutedText, size: 12 }));
    out.push('</g>');
  }
  return out;
}

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

function drawReadings(m: MeasurandSeries, x: ScaleTime<number, number>, f: Frame, width: number, labels: PanelLabels): string[] {
  const out: string[] = [];
  const starts = m.charges.filter((c) => c.index > 0 && c.points.length > 0);
  const labelled = spacing(starts.map((c) => x(Date.parse(c.points[0]!.sampledAt)))) > 80;
  for (const c of starts) {
    const px = r(x(Date.parse(c.points[0]!.sampledAt)) - 4);
    out.push(`<line data-charge-start="${c.index}" x1="${px}" x2="${px}" y1="${f.top}" y2="${f.top + f.height}" stroke="${NEUTRAL.band}" stroke-dasharray="2 3"/>`);
    if (labelled) labels.inPlot(px + 3, f.top + 12, c.startedBy === 'componentChanged' ? 'component change' : 'oil change', 'start', { fill: NEUTRAL.mutedText });
  }
  out.push(...levelLines(m.limits, 'fixed', f, width, 'limit', labels));
  out.push(...populationLines(m, x, f, width, labels));
  for (const c of m.charges) {
    const pts = c.points.map((p) => ({ sampleId: p.sampleId, time: Date.parse(p.sampledAt), value: p.value }));
    out.push(path(pts, x, f.y, { stroke: NEUTRAL.data, width: 1.8 }, `data-charge="${c.index}"`));
    for (const p of c.points) {
      const [px, py] = [r(x(Date.parse(p.sampledAt))), r(f.y(p.value))];
      out.push(
        p.censored
          ? `<circle data-censored="true" cx="${px}" cy="${py}" r="3.5" fill="${NEUTRAL.panel}" stroke="${NEUTRAL.data}" stroke-width="1.4"><title>${escapeXml(`${p.sampleId}: ${p.text}`)}</title></circle>`
          : `<circle cx="${px}" cy="${py}" r="2.6" fill="${NEUTRAL.data}"><title>${escapeXml(`${p.sampleId}: ${p.text} ${m.unit}`)}</title></circle>`,
      );
    }
  }
  return out;
}

const SIZE_RANGES = [
  { key: 'p4', label: '≥4 µm', dash: '' },
  { key: 'p6', label: '≥6 µm', dash: '5 2' },
  { key: 'p14', label: '≥14 µm', dash: '1.5 2.5' },
] as const;

function codeNumbers(code: Iso4406Code): number[] {
  return [code.p4, code.p6, code.p14].filter((n): n is number => n !== null);
}

/** One line per size range, each with its own dash pattern and name, against the target's scale numbers. */
function drawCodes(c: CleanlinessSeries, x: ScaleTime<number, number>, f: Frame, width: number, labels: PanelLabels): string[] {
  const out: string[] = [];
  for (const range of SIZE_RANGES) {
    const target = c.target?.[range.key];
    if (target !== undefined && target !== null) {
      const y = r(f.y(target));
      out.push(
        `<line data-limit="target" data-kind="cleanliness" data-size="${range.key}" data-value="${target}" x1="${MARGIN.left}" x2="${width - MARGIN.right}" y1="${y}" y2="${y}" stroke="${NEUTRAL.limit}" stroke-width="1.4" stroke-dasharray="4 3"/>`,
      );
      labels.inPlot(MARGIN.left + 4, y - 3, `target ${range.label} ${target}`, 'start', { fill: NEUTRAL.mutedText, halo: true });
    }
    const pts = c.points.map((p) => ({ sampleId: p.sampleId, time: Date.parse(p.sampledAt), value: p.code[range.key] ?? NaN }));
    if (pts.every((p) => Number.isNaN(p.value))) continue;
    out.push(path(pts, x, f.y, { stroke: NEUTRAL.data, width: 1.6, ...(range.dash && { dash: range.dash }) }, `data-size="${range.key}"`));
    for (const p of pts.filter((q) => !Number.isNaN(q.value))) {
      out.push(`<circle cx="${r(x(p.time))}" cy="${r(f.y(p.value))}" r="2.4" fill="${NEUTRAL.data}"><title>${escapeXml(`${p.sampleId}: ${range.label} scale number ${p.value}`)}</title></circle>`);
    }
    const last = [...pts].reverse().find((p) => !Number.isNaN(p.value))!;
    labels.right(f.y(last.value), `${range.label} ${last.value}`);
  }
  return out;
}

function populationLines(m: MeasurandSeries, x: ScaleTime<number, number>, f: Frame, width: number, labels: PanelLabels): string[] {
  if (m.population === null || m.population.length === 0) return [];
  const out: string[] = [];
  const [, hi] = f.y.domain() as [number, number];
  for (const level of ['caution', 'alarm'] as const) {
    const pts = m.population.map((p) => ({
      sampleId: p.sampleId,
      time: Date.parse(p.sampledAt),
      value: p.status.kind === 'limits' && p.status[level] <= hi ? p.status[level] : NaN,
    }));
    if (pts.every((p) => Number.isNaN(p.value))) continue;
    // The band (and so the limit) changes with the oil hours of each sample: a short level at every judged reading.
    const d = pts.filter((p) => !Number.isNaN(p.value)).map((p) => `M${r(x(p.time) - 7)},${r(f.y(p.value))}h14`).join('');
    out.push(`<path data-limit="${level}" data-kind="population" d="${d}" fill="none" stroke="${NEUTRAL.band}" stroke-width="${level === 'alarm' ? 2.4 : 1.8}"/>`);
    const last = [...pts].reverse().find((p) => !Number.isNaN(p.value));
    if (last) labels.right(f.y(last.value), `group ${level} ${fmt(last.value)}`, { fill: NEUTRAL.mutedText });
  }
  const latest = m.population[m.population.length - 1]!;
  if (latest.status.kind === 'not-enough-data') {
    const long = `group limits: not enough data (${latest.status.n} of ${latest.status.needed} results)`;
    const room = width - MARGIN.left - MARGIN.right - textWidth(readingsHeading(m), 13) - 24;
    const note = textWidth(long, 11) < room ? long : `group limits: n = ${latest.status.n} of ${latest.status.needed}`;
    out.push(text(width - MARGIN.right, f.top - 7, note, { anchor: 'end', size: 11, fill: NEUTRAL.mutedText, attrs: 'data-population="not-enough-data"' }));
  }
  return out;
}

/** Horizontal caution/alarm lines labelled at the right; a level above the scale is named at the panel's top. */
function levelLines(levels: Levels | null, kind: 'fixed' | 'rate', f: Frame, width: number, noun: string, labels: PanelLabels): string[] {
  if (levels === null) return [];
  const out: string[] = [];
  const [, hi] = f.y.domain() as [number, number];
  for (const level of ['caution', 'alarm'] as const) {
    const v = levels[level];
    if (v === undefined) continue;
    if (v > hi) {
      labels.right(f.top + 8, `${level} ${fmt(v)} ↑`, { fill: NEUTRAL.mutedText, attrs: `data-limit="${level}" data-kind="${kind}" data-off-scale="true"` });
      continue;
    }
    const y = r(f.y(v));
    out.push(
      `<line data-limit="${level}" data-kind="${kind}" data-value="${v}" x1="${MARGIN.left}" x2="${width - MARGIN.right}" y1="${y}" y2="${y}" stroke="${NEUTRAL.limit}" stroke-width="${level === 'alarm' ? 2 : 1.4}" stroke-dasharray="${level === 'alarm' ? '8 3' : '4 3'}"/>`,
    );
    labels.right(y, `${level} ${noun} ${fmt(v)}`);
  }
  return out;
}

function drawRates(m: MeasurandSeries, x: ScaleTime<number, number>, f: Frame, width: number, labels: PanelLabels): string[] {
  const rates = m.rates!;
  const out = levelLines(rates.limits, 'rate', f, width, 'rate', labels);
  const byCharge = new Map<number, Point[]>();
  for (const p of rates.points) {
    const list = byCharge.get(p.chargeIndex) ?? [];
    list.push({ sampleId: p.sampleId, time: Date.parse(p.sampledAt), value: p.per100h });
    byCharge.set(p.chargeIndex, list);
  }
  for (const [charge, pts] of byCharge) out.push(path(pts, x, f.y, { stroke: NEUTRAL.data, width: 1.4 }, `data-charge="${charge}"`));
  for (const p of rates.points) {
    const hollow = p.censored || p.runningIn;
    const [px, py] = [r(x(Date.parse(p.sampledAt))), r(f.y(p.per100h))];
    const note = p.runningIn ? ' (running in, not judged)' : p.censored ? ' (censored reading: a bound only)' : '';
    out.push(
      `<circle cx="${px}" cy="${py}" r="${hollow ? 3.2 : 2.4}" fill="${hollow ? NEUTRAL.panel : NEUTRAL.data}" stroke="${NEUTRAL.data}" stroke-width="1.2"><title>${escapeXml(`${p.sampleId}: ${fmt(p.per100h)} ${m.unit}/100 h over ${fmt(p.hours)} h${note}`)}</title></circle>`,
    );
  }
  return out;
}

function drawCusum(m: MeasurandSeries, x: ScaleTime<number, number>, f: Frame, width: number, labels: PanelLabels): string[] {
  const c = m.cusum!;
  const out: string[] = [];
  const two = c.sided === 'two';
  for (const [sign, label] of two ? ([[1, 'h'], [-1, '−h']] as const) : ([[1, 'h']] as const)) {
    const y = r(f.y(sign * c.h));
    out.push(
      `<line data-limit="decision-interval" data-kind="cusum" data-value="${sign * c.h}" x1="${MARGIN.left}" x2="${width - MARGIN.right}" y1="${y}" y2="${y}" stroke="${NEUTRAL.limit}" stroke-width="1.6" stroke-dasharray="6 3"/>`,
    );
    labels.right(y, sign > 0 ? `${label} = ${fmt(c.h)}` : label);
  }
  for (const life of lives(c.points)) {
    out.push(path(life.map((p) => ({ sampleId: p.sampleId, time: Date.parse(p.sampledAt), value: p.upper })), x, f.y, { stroke: NEUTRAL.data, width: 1.6 }, 'data-statistic="upper"'));
    if (two) {
      out.push(
        path(life.map((p) => ({ sampleId: p.sampleId, time: Date.parse(p.sampledAt), value: -p.lower })), x, f.y, { stroke: NEUTRAL.data, width: 1.2, dash: '3 2' }, 'data-statistic="lower"'),
      );
    }
  }
  if (two) labels.inPlot(MARGIN.left + 6, f.top + f.height - 6, 'below 0: falling wear (check sampling)', 'start', { fill: NEUTRAL.mutedText });
  return out;
}

function drawEwma(m: MeasurandSeries, x: ScaleTime<number, number>, f: Frame, labels: PanelLabels): string[] {
  const e = m.ewma!;
  const out: string[] = [];
  for (const life of lives(e.points)) {
    const pts = (key: 'ucl' | 'lcl' | 'ewma') => life.map((p) => ({ sampleId: p.sampleId, time: Date.parse(p.sampledAt), value: p[key] }));
    out.push(path(pts('ucl'), x, f.y, { stroke: NEUTRAL.limit, width: 1.5, dash: '6 3', curve: 'step' }, 'data-limit="ucl" data-kind="ewma"'));
    if (e.sided === 'two') out.push(path(pts('lcl'), x, f.y, { stroke: NEUTRAL.limit, width: 1.5, dash: '6 3', curve: 'step' }, 'data-limit="lcl" data-kind="ewma"'));
    out.push(path(pts('ewma'), x, f.y, { stroke: NEUTRAL.data, width: 1.6 }, 'data-statistic="ewma"'));
  }
  const last = e.points[e.points.length - 1];
  if (last) {
    labels.right(f.y(last.ucl), `limit ${fmt(last.ucl)}`);
    if (e.sided === 'two') labels.right(f.y(last.lcl), `limit ${fmt(last.lcl)}`);
  }
  return out;
}

/** Marks of one panel: at the point the rule judged, stacked upwards where several rules fired at one sample. */
function drawMarks(m: MeasurandSeries, panel: MarkPanel, x: ScaleTime<number, number>, f: Frame, width: number, labels: PanelLabels): string[] {
  const marks = m.marks.filter((k) => k.panel === panel);
  if (marks.length === 0) return [];
  const order = new Map(m.charges.flatMap((c) => c.points).map((p, i) => [p.sampleId, i]));
  const stacked = new Map<string, number>();
  const previousRun = new Map<string, number>();
  const out: string[] = [];
  for (const mark of marks) {
    const level = stacked.get(mark.sampleId) ?? 0;
    stacked.set(mark.sampleId, level + 1);
    const [lo, hi] = f.y.domain() as [number, number];
    const anchorValue = Math.min(hi, Math.max(lo, markValue(m, mark)));
    const px = r(x(Date.parse(mark.sampledAt)));
    const py = r(Math.max(f.top + 6, f.y(anchorValue) - level * STACK_STEP));
    const style = SEVERITY_STYLE[mark.severity];
    const runKey = `${mark.rule}:${mark.severity}:${mark.direction ?? ''}`;
    const index = order.get(mark.sampleId) ?? -2;
    const continues = previousRun.get(runKey) === index - 1;
    previousRun.set(runKey, index);
    // A run of one rule's verdicts gets its word once, at its start; the later marks of the run are smaller.
    const shape = symbol(style.symbol, (mark.severity === 'watch' ? 90 : 110) * (continues ? 0.3 : 1))();
    out.push(
      `<g class="mark" data-rule="${mark.rule}" data-severity="${mark.severity}" data-sample="${escapeXml(mark.sampleId)}" transform="translate(${px},${py})">`,
      `<title>${escapeXml(`${style.word}, ${mark.rule} rule, sample ${mark.sampleId}: ${mark.explanation}`)}</title>`,
      `<path d="${shape}" fill="${style.filled ? style.colour : NEUTRAL.panel}" stroke="${style.filled ? NEUTRAL.text : style.colour}" stroke-width="${style.filled ? 1 : 2.2}"/>`,
    );
    if (!continues) {
      const label = `${style.word} · ${ruleWord(mark)}`;
      const right = px + 10 + textWidth(label, 11) < width - MARGIN.right;
      labels.inPlot(right ? px + 10 : px - 10, py + 4, label, right ? 'start' : 'end', { weight: mark.severity === 'alarm' ? 'bold' : 'normal', halo: true });
    }
    out.push('</g>');
  }
  return out;
}

function markValue(m: MeasurandSeries, mark: RuleMark): number {
  switch (mark.panel) {
    case 'readings': {
      const code = m.cleanliness?.points.find((p) => p.sampleId === mark.sampleId)?.code;
      if (code !== undefined) return max(codeNumbers(code))!;
      return m.charges.flatMap((c) => c.points).find((p) => p.sampleId === mark.sampleId)?.value ?? mark.value;
    }
    case 'rate':
      return m.rates?.points.find((p) => p.sampleId === mark.sampleId)?.per100h ?? mark.value;
    case 'cusum':
      return mark.direction === 'down' ? -mark.value : mark.value;
    case 'ewma':
      return mark.value;
  }
}

function ruleWord(mark: RuleMark): string {
  const arrow = mark.direction === 'up' ? ' ↑' : mark.direction === 'down' ? ' ↓' : '';
  return `${RULE_FAMILY_LABELS[mark.rule]}${arrow}`;
}

interface ProjectionAt {
  readonly time: number;
  readonly central: number;
  readonly low: number;
  readonly high: number;
}

/** The forecast's projection on the time axis: only when the hours run per day place it in time. */
function projectionOf(m: MeasurandSeries): ProjectionAt[] {
  if (m.cleanliness !== null || m.forecast === null) return [];
  return m.forecast.projection.flatMap((p) => (p.at === undefined ? [] : [{ time: Date.parse(p.at), central: p.central, low: p.low, high: p.high }]));
}

/**
 * The projected level from the last reading on: the central estimate dashed, the interval as a light band, so that the
 * engineer sees where the trend heads and how sure that is, not a line to take as fact.
 */
function drawProjection(
  m: MeasurandSeries,
  points: readonly ProjectionAt[],
  [a, b]: readonly [number, number],
  x: ScaleTime<number, number>,
  f: Frame,
  labels: PanelLabels,
): string[] {
  const [lo, hi] = f.y.domain() as [number, number];
  const clamp = (v: number) => f.y(Math.min(hi, Math.max(lo, v)));
  const upper = points.map((p) => `${r(x(p.time))},${r(clamp(p.high))}`);
  const lower = [...points].reverse().map((p) => `${r(x(p.time))},${r(clamp(p.low))}`);
  const central = points.map((p, i) => `${i === 0 ? 'M' : 'L'}${r(x(p.time))},${r(clamp(p.central))}`).join('');
  const title = escapeXml(`Projection at the present rate, ${a}th–${b}th percentile band; a forecast assumes the present rate continues`);
  const last = points[points.length - 1]!;
  labels.inPlot(r(x(last.time)) - 4, r(clamp(last.central)) - 6, 'forecast', 'end', { fill: NEUTRAL.mutedText });
  return [
    `<g data-forecast="${escapeXml(m.measurand)}"><title>${title}</title>`,
    `<polygon data-forecast-band="${a}-${b}" points="${[...upper, ...lower].join(' ')}" fill="${NEUTRAL.band}" fill-opacity="0.28" stroke="none"/>`,
    `<path data-forecast-central="true" d="${central}" fill="none" stroke="${NEUTRAL.data}" stroke-width="1.6" stroke-dasharray="5 4"/>`,
    '</g>',
  ];
}

function legend(y: number, width: number, forecastPoints = 0): string[] {
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

interface LabelStyle {
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
class PanelLabels {
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

/** Width of a line of DejaVu Sans, whose average glyph is about 0.62 em wide. */
function textWidth(content: string, size: number): number {
  return content.length * size * 0.62;
}

function lives<T extends { life: number }>(points: readonly T[]): T[][] {
  const out = new Map<number, T[]>();
  for (const p of points) out.set(p.life, [...(out.get(p.life) ?? []), p]);
  return [...out.values()];
}

function path(
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

function text(
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

/** The smallest gap between neighbouring positions; Infinity with fewer than two. */
function spacing(xs: number[]): number {
  const sorted = [...xs].sort((a, b) => a - b);
  let gap = Infinity;
  for (let i = 1; i < sorted.length; i++) gap = Math.min(gap, sorted[i]! - sorted[i - 1]!);
  return gap;
}

function r(v: number): number {
  return Math.round(v * 10) / 10;
}

/** Three significant figures (whole numbers from 1000), with a true minus sign as the axis labels have. */
function fmt(v: number): string {
  const text = Math.abs(v) >= 1000 ? String(Math.round(v)) : String(Number(v.toPrecision(3)));
  return text.replace('-', '−');
}
