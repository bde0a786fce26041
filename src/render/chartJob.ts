/**
 * One piece of chart work, as a chart thread runs it (chartThread.ts): evaluate the component's history, build the
 * series, and either return the series or draw one measurand's trend chart over at most `sampleBudget` samples
 * (src/charts/chartWindow.ts) as SVG or PNG. Pure and synchronous; the pool bounds how long it may take.
 */
import { chartAltText } from '../charts/altText.ts';
import { renderChartPng } from '../charts/chartPng.ts';
import { latestWindow } from '../charts/chartWindow.ts';
import { buildComponentSeries, type ComponentSeries } from '../charts/componentSeries.ts';
import { renderTrendChart } from '../charts/trendChart/trendChart.ts';
import type { MeasurandReadiness } from '../analysis/readiness.ts';
import type { Measurand } from '../domain/measurands.ts';
import { monthOf } from '../pipeline/groupShares.ts';
import { viewOf } from '../pipeline/componentView.ts';
import type { ComponentInput } from './componentInput.ts';

export type ChartJob =
  | { readonly kind: 'series'; readonly input: ComponentInput; readonly measurands?: readonly Measurand[] }
  | { readonly kind: 'chart'; readonly format: 'svg' | 'png'; readonly input: ComponentInput; readonly measurand: Measurand; readonly width: number; readonly title: boolean };

export type ChartJobResult =
  /** The series with its readiness, as JSON text: one string crosses back to the request's thread faster than an object graph. */
  | { readonly kind: 'series'; readonly json: string }
  | { readonly kind: 'no-readings' }
  | { readonly kind: 'svg'; readonly svg: string; readonly alt: string; readonly shown: number; readonly of: number }
  | { readonly kind: 'png'; readonly png: Uint8Array; readonly alt: string; readonly shown: number; readonly of: number };

export function runChartJob(job: ChartJob, sampleBudget: number): ChartJobResult {
  const { input } = job;
  const view = viewOf(input.entry, input.settings, input.samples, (s) => input.groups.get(monthOf(s.time)), input.marks, input.start?.analysis, input.others);
  const earlier = input.start?.samples ?? 0;
  if (job.kind === 'series') {
    const series = buildComponentSeries(view.evaluation, view.settings, view.group, job.measurands === undefined ? {} : { measurands: job.measurands });
    const body: ComponentSeries & { readonly readiness: readonly MeasurandReadiness[]; readonly earlierSamples?: number } = { ...series, readiness: view.readiness, ...(earlier > 0 && { earlierSamples: earlier }) };
    return { kind: 'series', json: JSON.stringify(body) };
  }
  const full = buildComponentSeries(view.evaluation, view.settings, view.group, { measurands: [job.measurand] });
  const m = full.measurands.find((x) => x.measurand === job.measurand);
  if (m === undefined || (m.charges.every((c) => c.points.length === 0) && (m.cleanliness?.points.length ?? 0) === 0)) return { kind: 'no-readings' };
  const window = latestWindow(full, sampleBudget);
  const { series, shown } = window;
  // Samples before a bounded input's start were folded into its checkpoint, not loaded: they count in the history.
  const of = window.of + earlier;
  const heading = `${series.unit} / ${series.component} — ${m.measurand} (${m.label})${shown < of ? ` — latest ${shown} of ${of} samples` : ''}`;
  const svg = renderTrendChart(series, job.measurand, { width: job.width, title: job.title ? heading : false });
  const alt = chartAltText(series, job.measurand);
  if (job.format === 'svg') return { kind: 'svg', svg, alt, shown, of };
  return { kind: 'png', png: renderChartPng(svg, job.width), alt, shown, of };
}
