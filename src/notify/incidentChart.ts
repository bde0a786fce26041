/**
 * The trend chart an incident e-mail carries inline: the component's history evaluated as the worker judges
 * it, drawn for the measurand behind the incident (its own measurand, else its most severe finding's).
 */
import { chartAltText } from '../charts/altText.ts';
import { renderChartPng } from '../charts/chartPng.ts';
import { buildComponentSeries } from '../charts/componentSeries.ts';
import { renderTrendChart } from '../charts/trendChart.ts';
import type { Config } from '../domain/config.ts';
import { severityRank } from '../domain/finding.ts';
import type { NotifyEffect } from '../incidents/model.ts';
import { componentView } from '../pipeline/componentView.ts';
import type { ComponentStore, GroupLedger } from '../pipeline/ports.ts';

/** Wide enough to read on a desktop client, narrow enough for a phone (the HTML lets it shrink). */
export const EMAIL_CHART_WIDTH = 600;

/** The incident's trend chart as an inline PNG, for the e-mail channel. */
export interface EmailChart {
  readonly png: Buffer;
  readonly width: number;
  /** Says in words what the chart shows, for readers who do not see images. */
  readonly alt: string;
}

export async function incidentChart(store: ComponentStore, ledger: GroupLedger, config: Config, effect: NotifyEffect): Promise<EmailChart | undefined> {
  const measurand = effect.incident.measurand ?? [...effect.incident.findings].sort((a, b) => severityRank(b.severity) - severityRank(a.severity))[0]?.measurand;
  if (measurand === undefined) return undefined;
  const view = await componentView(store, ledger, config, effect.incident);
  if (view === undefined) return undefined;
  const series = buildComponentSeries(view.evaluation, view.settings, view.group, { measurands: [measurand] });
  if (!series.measurands.some((m) => m.measurand === measurand)) return undefined;
  const svg = renderTrendChart(series, measurand, { width: EMAIL_CHART_WIDTH });
  return { png: renderChartPng(svg, EMAIL_CHART_WIDTH), width: EMAIL_CHART_WIDTH, alt: chartAltText(series, measurand) };
}
