/**
 * The trend chart an incident e-mail carries inline: the component's history evaluated as the worker judges
 * it, drawn for the measurand behind the incident (its own measurand, else that of the first finding of its
 * evidence: most severe, then furthest beyond its limit, as the e-mail lists the evidence and the board charts it). A sampling
 * check that judges the whole sample (a duplicated bottle, hours going back…) is about no metal: an incident with only
 * such evidence gets no chart, rather than the trend of the measurand those findings are filed under. Drawn on a
 * chart thread with a time limit and a sample budget (src/render/chartPool.ts), so a very long history delays no
 * other job of this process; a chart that cannot be drawn in time is left out of the mail.
 */
import type { Config } from '../domain/config.ts';
import { chartable } from '../domain/finding.ts';
import type { NotifyEffect } from '../incidents/model.ts';
import type { ComponentStore, GroupLedger } from '../pipeline/ports.ts';
import type { ChartPool } from '../render/chartPool.ts';
import { runChartJob } from '../render/chartJob.ts';
import { componentInput } from '../render/componentInput.ts';
import { sharedChartPool } from '../render/sharedChartPool.ts';
import { bySeverity } from './message.ts';

/** Wide enough to read on a desktop client, narrow enough for a phone (the HTML lets it shrink). */
export const EMAIL_CHART_WIDTH = 600;

/** The incident's trend chart as an inline PNG, for the e-mail channel. */
export interface EmailChart {
  readonly png: Buffer;
  readonly width: number;
  /** Says in words what the chart shows, for readers who do not see images. */
  readonly alt: string;
}

export async function incidentChart(store: ComponentStore, ledger: GroupLedger, config: Config, effect: NotifyEffect, pool: ChartPool = sharedChartPool()): Promise<EmailChart | undefined> {
  const ofMetals = effect.incident.findings.filter(chartable);
  // The evidence's order (most severe first, then furthest beyond its limit), as the e-mail lists it and the board charts it.
  const measurand = effect.incident.measurand ?? bySeverity(ofMetals)[0]?.measurand;
  if (measurand === undefined) return undefined;
  const input = await componentInput(store, ledger, config, effect.incident, { latestSamples: pool.sampleBudget });
  if (input === undefined) return undefined;
  const job = { kind: 'chart', format: 'png', input, measurand, width: EMAIL_CHART_WIDTH, title: true } as const;
  // A history within the drawing budget is drawn here at once (a fraction of a second); a longer one on the chart
  // thread, bounded in time, so that it cannot hold up the other jobs of this process.
  const result = input.samples.length <= pool.sampleBudget ? runChartJob(job, pool.sampleBudget) : await pool.run(job);
  if (result.kind !== 'png') return undefined;
  return { png: Buffer.from(result.png), width: EMAIL_CHART_WIDTH, alt: result.alt };
}
