/**
 * The trend charts of one component for the backtest report. The marks are the findings each sample raised when the
 * worker judged it on arrival (what the incident engine acted on); the levels and detector traces are those of the
 * whole history, as the board draws them.
 */
import { buildComponentSeries } from '../charts/componentSeries.ts';
import { renderTrendChart } from '../charts/trendChart/trendChart.ts';
import type { Measurand } from '../domain/measurands.ts';
import type { ComponentRun } from './run.ts';

export interface ComponentChart {
  readonly measurand: Measurand;
  readonly svg: string;
  /** Findings on this measurand over the history. */
  readonly marks: number;
}

export interface ChartOptions {
  /** Chart width in pixels. Default 760. */
  readonly width?: number;
  /** Only measurands with a finding, besides the detection measurands. Default true: the rest add pages, not insight. */
  readonly flaggedOnly?: boolean;
}

export function componentCharts(run: ComponentRun, options: ChartOptions = {}): ComponentChart[] {
  const evaluation = {
    ...run.evaluation,
    steps: run.evaluation.steps.map((s) => ({ ...s, findings: run.findingsBySample.get(s.sampleId) ?? [] })),
  };
  const series = buildComponentSeries(evaluation, run.settings, run.groupStats);
  const detection = new Set<Measurand>(run.settings.detection.measurands);
  const flaggedOnly = options.flaggedOnly ?? true;
  // Measurands where a rule fired first, so that an open component shows its story at the top.
  const measurands = [...series.measurands].sort((a, b) => Number(b.marks.length > 0) - Number(a.marks.length > 0));
  return measurands
    .filter((m) => !flaggedOnly || m.marks.length > 0 || detection.has(m.measurand))
    .flatMap((m) => {
      const plotted = m.charges.some((c) => c.points.length > 0) || (m.cleanliness?.points.length ?? 0) > 0;
      if (!plotted) return [];
      return [{ measurand: m.measurand, svg: renderTrendChart(series, m.measurand, { width: options.width ?? 760, title: false }), marks: m.marks.length }];
    });
}
