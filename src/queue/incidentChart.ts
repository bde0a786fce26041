/**
 * The trend chart an incident e-mail carries inline: the component's history evaluated as the worker judges
 * it, drawn for the measurand behind the incident (its own measurand, else its most severe finding's).
 */
import { evaluateComponent } from '../analysis/evaluate.ts';
import { chartAltText } from '../charts/altText.ts';
import { renderChartPng } from '../charts/chartPng.ts';
import { buildComponentSeries } from '../charts/componentSeries.ts';
import { renderTrendChart } from '../charts/trendChart.ts';
import type { Config } from '../domain/config.ts';
import { componentKey, type Sample } from '../domain/event.ts';
import { severityRank } from '../domain/finding.ts';
import { resolveSettings } from '../domain/settings.ts';
import type { NotifyEffect } from '../incidents/model.ts';
import type { EmailChart } from '../notify/emailRender.ts';
import type { Storage } from '../storage/storage.ts';
import { groupStatsFor } from './evaluateStored.ts';

/** Wide enough to read on a desktop client, narrow enough for a phone (the HTML lets it shrink). */
export const EMAIL_CHART_WIDTH = 600;

export async function incidentChart(storage: Storage, config: Config, effect: NotifyEffect, revisions: readonly Sample[]): Promise<EmailChart | undefined> {
  const first = revisions[0];
  const measurand = effect.incident.measurand ?? [...effect.incident.findings].sort((a, b) => severityRank(b.severity) - severityRank(a.severity))[0]?.measurand;
  if (first === undefined || measurand === undefined) return undefined;
  const settings = resolveSettings(config, first);
  const group = await groupStatsFor(storage, settings, componentKey(first));
  const series = buildComponentSeries(evaluateComponent(revisions, settings, group), settings, group, { measurands: [measurand] });
  if (!series.measurands.some((m) => m.measurand === measurand)) return undefined;
  const svg = renderTrendChart(series, measurand, { width: EMAIL_CHART_WIDTH });
  return { png: renderChartPng(svg, EMAIL_CHART_WIDTH), width: EMAIL_CHART_WIDTH, alt: chartAltText(series, measurand) };
}
