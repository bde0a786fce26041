/**
 * `wearshift backtest FILE`: replays a CSV or JSONL history through the worker's own pipeline in-process (no Redis)
 * and writes a self-contained HTML report: incidents per rule family and per 100 component-years, the alarm-management
 * key figures (load per responder, standing, stale, chattering, bad actors), how much earlier
 * EWMA/CUSUM spoke than the fixed and classic limits, what only one side caught, the detector parameters (from a
 * false-alarm budget with --budget), a second configuration side by side with --compare, and every trend chart.
 */
import { writeFileSync } from 'node:fs';
import type { Command } from 'commander';
import { backtest, type BacktestConfiguration } from '../../backtest/backtest.ts';
import { componentCharts } from '../../backtest/charts.ts';
import { readBudget } from '../../backtest/parameters.ts';
import { renderBacktestReport } from '../../backtest/reportHtml.ts';
import { MIN_COMPONENT_YEARS, type BacktestSummary } from '../../backtest/summary.ts';
import { loadConfig } from '../../runtime/loadConfig.ts';
import { InputError } from '../../domain/errors.ts';
import { formatOf, readRecordFile, type SourceRecord } from '../../intake/fileRecords.ts';
import type { RefusedVerdict, RejectedRecord } from '../../pipeline/replay.ts';
import { readSampleVerdictFile } from '../../intake/sampleVerdictFile.ts';
import { terminalText } from '../terminalText.ts';
import { ADVISORY_LINE, processingTime, writeJsonLine } from '../output.ts';

interface BacktestCommandOptions {
  config?: string;
  format?: string;
  budget?: string;
  compare?: string;
  out?: string;
  json?: boolean;
  now?: string;
  sampleVerdicts?: string;
}

const HELP = `
Each configuration replays the whole file on its own, in file order, through the same storing, evaluation and incident
code as the worker. Every result is taken as arriving live, at its sampling time: none is quiet backfill
(backfill.quietAfterDays does not apply), so the incidents are those production keeps when the results come in as they
are sampled, whatever --now and the age of the history. An incident is one episode; EWMA/CUSUM count on rises only,
classic rules are limit, rate and population. Leads are in samples of the component, operating hours (unit-hours meter)
and days. Exposure is counted in component-years, each component from its first to its last sample; rates per 100
component-years are given from ${MIN_COMPONENT_YEARS} component-year of exposure on (below it the summary says the exposure
is too short, and the JSON gives null beside the exposure).
The alarm-management key figures (ISA-18.2 / IEC 62682, EEMUA 191) count annunciations (an incident opening or becoming
active again) per tier-0 responder of the escalation chain running at that point (the policy matching the incident's
severity when it was announced), per day and per week (average and peak), and standing, stale and chattering incidents
by the thresholds of the alarmFigures section. Nobody acknowledges in a backtest: stale shows what would go stale, and
the later tiers are listed apart with what they would hear of if nobody acknowledged within their delay.
--budget "A per component per Y years" replaces the configured false-alarm budget (alarms and period; the sample
interval and hours per year stay as configured) in every configuration; the report shows the h and L it gives and the
"wearshift design" commands that print the same numbers.
--sample-verdicts FILE gives responders' words on samples (JSON lines as \`wearshift sample-verdicts\` writes them from
the live store) in every configuration, each as the API takes it once the history has brought its sample: a word a configuration's run
refuses (its sample does not take it there) is named on stderr, and the summary counts them (sampleVerdicts).
--json prints the summary as one JSON object; the HTML embeds the same object in <script id="summary">.
Give --out, --json or both. Exit code 1 when records were rejected or words refused (the rest is still backtested), 2 on
bad input (a line of --sample-verdicts that is not a word: nothing is backtested).`;

export function registerBacktest(program: Command): void {
  program
    .command('backtest')
    .argument('<file>', 'CSV or JSONL history, as for import')
    .option('--config <file>', 'configuration file (default: WEARSHIFT_CONFIG, else the built-in defaults)')
    .option('--format <format>', 'csv or jsonl (default: from the file name)')
    .option('--budget <text>', 'false-alarm budget to design h and L from, e.g. "1 per component per 3 years"')
    .option('--compare <file>', 'a second configuration, backtested on the same history and shown side by side')
    .option('--sample-verdicts <file>', "responders' words on samples, JSON lines as `wearshift sample-verdicts` writes them (below)")
    .option('--out <file>', 'write the HTML report here')
    .option('--json', 'print the summary as one JSON object')
    .option('--now <time>', 'processing time, ISO 8601 with a time zone (e.g. 2027-01-01T00:00:00Z): samples dated more than a day after it are rejected as lying in the future; nothing else depends on it (default: now)')
    .addHelpText('after', HELP)
    .action(async (file: string, opts: BacktestCommandOptions) => {
      if (opts.out === undefined && !opts.json) throw new InputError('give --out report.html, --json, or both');
      const format = formatOf(file, opts.format);
      const now = processingTime(opts.now);
      const budget = opts.budget === undefined ? undefined : readBudget(opts.budget);
      const configurations = configurationsOf(opts);
      const sampleVerdicts = opts.sampleVerdicts === undefined ? undefined : readSampleVerdictFile(opts.sampleVerdicts);
      const records = await readAll(file, format);
      const { summary, runs } = await backtest(records, {
        file,
        configurations,
        now,
        ...(budget !== undefined && { budget }),
        onRejected: reportRejected,
        ...(sampleVerdicts !== undefined && {
          sampleVerdicts,
          onRefusedVerdict: (r: RefusedVerdict, label: string) =>
            process.stderr.write(terminalText(`${opts.sampleVerdicts}:${r.line}: ${r.verdict} on sample ${r.sampleId} of ${r.unit}/${r.component} not given with ${label}: ${r.reason}\n`)),
        }),
      });
      if (summary.fleet.components === 0) throw new InputError(`${file}: no valid result record to backtest (${summary.records} records, ${summary.rejected} rejected)`);
      if (opts.out !== undefined) {
        const components = runs[0]!.components.map((c) => ({ unit: c.unit, component: c.component, charts: componentCharts(c) }));
        try {
          writeFileSync(opts.out, renderBacktestReport(summary, components));
        } catch (e) {
          throw new InputError(`${opts.out}: cannot write the report: ${(e as Error).message}`);
        }
      }
      if (opts.json) writeJsonLine(summary);
      else process.stdout.write(readable(summary, opts.out));
      process.exitCode = summary.rejected > 0 || (summary.sampleVerdicts?.refused.some((n) => n > 0) ?? false) ? 1 : 0;
    });
}

function configurationsOf(opts: BacktestCommandOptions): BacktestConfiguration[] {
  const main = opts.config ?? process.env.WEARSHIFT_CONFIG;
  const list: BacktestConfiguration[] = [{ label: main ?? 'built-in defaults', configFile: main ?? null, config: loadConfig(main) }];
  if (opts.compare !== undefined) {
    const label = opts.compare === list[0]!.label ? `${opts.compare} (second)` : opts.compare;
    list.push({ label, configFile: opts.compare, config: loadConfig(opts.compare) });
  }
  return list;
}

async function readAll(file: string, format: 'csv' | 'jsonl'): Promise<SourceRecord[]> {
  const { records, stream } = readRecordFile(file, format);
  await new Promise<void>((resolve, reject) => {
    stream.once('open', () => resolve());
    stream.once('error', (e) => reject(new InputError(`${file}: ${e.message}`)));
  });
  const all: SourceRecord[] = [];
  for await (const r of records) all.push(r);
  return all;
}

function reportRejected(r: RejectedRecord): void {
  for (const e of r.errors) process.stderr.write(`line ${r.line}${r.sampleId === undefined ? '' : ` (sampleId ${r.sampleId})`}: ${e.path || '(record)'}: ${e.reason}\n`);
}

function readable(s: BacktestSummary, out: string | undefined): string {
  const lines = [
    `history: ${s.file}: ${s.records} records (${s.rejected} rejected), ${s.fleet.components} components, ${s.fleet.samples} samples, ${fmt(s.fleet.componentYears)} component-years`,
  ];
  for (const r of s.runs) {
    const prefix = s.runs.length > 1 ? `[${r.label}] ` : '';
    lines.push(`${prefix}configuration: ${r.configFile ?? 'built-in defaults'}${r.budget ? `, budget "${r.budget.text}"` : ''}`);
    for (const p of r.parameters) {
      lines.push(
        `${prefix}  ${p.groups.join(', ')}: ${p.charts} charts, per-chart ARL0 ${fmt(p.arl0)}, CUSUM h = ${p.cusum.enabled ? fmt(p.cusum.h) : 'off'}, EWMA L = ${p.ewma.enabled ? fmt(p.ewma.L) : 'off'}` +
          (p.fall === null ? '' : `; a fall (sampling incident): ARL0 ${fmt(p.fall.arl0)}, h = ${fmt(p.fall.h)}, L = ${fmt(p.fall.L)}`),
      );
    }
    const fam = Object.entries(r.incidents.byFamily).filter(([, v]) => v.incidents > 0).map(([f, v]) => `${f} ${v.incidents}`).join(', ');
    const rate =
      r.incidents.per100ComponentYears === null
        ? `exposure ${fmt(r.incidents.componentYears)} component-years: too short for a rate per 100 component-years, which needs at least ${fmt(r.incidents.minComponentYears)}`
        : `${fmt(r.incidents.per100ComponentYears)} per 100 component-years`;
    lines.push(`${prefix}incidents: ${r.incidents.total} (${rate})${fam ? `; with ${fam}` : ''}`);
    const lim = r.earliness.vsLimit;
    const cls = r.earliness.vsClassic;
    lines.push(
      `${prefix}caught by both sides: ${cls.episodes}; EWMA/CUSUM ahead of the fixed limit by a median of ${lim.medianSamples === null ? '-' : `${fmt(lim.medianSamples)} samples${lim.medianHours === null ? '' : ` (${fmt(lim.medianHours)} operating hours)`}`} over ${lim.episodes}, of the first classic rule by ${cls.medianSamples === null ? '-' : `${fmt(cls.medianSamples)} samples${cls.medianHours === null ? '' : ` (${fmt(cls.medianHours)} h)`}`}`,
    );
    lines.push(`${prefix}one side only: EWMA/CUSUM ${r.oneSided.changeOnly.length}, classic ${r.oneSided.classicOnly.length}; neither ${r.oneSided.neither.length}`);
    const a = r.alarmFigures;
    const busiest = a.busiest === null ? 'no responder named' : `busiest responder ${a.busiest.responder}: ${fmt(a.busiest.perDay.average)} per day (peak ${a.busiest.perDay.peak}), ${fmt(a.busiest.perWeek.average)} per week (peak ${a.busiest.perWeek.peak})`;
    lines.push(
      `${prefix}alarm figures: ${a.annunciations} annunciations, ${busiest}; standing ${a.standing.peak} at most at once, stale ${a.stale.peak} (nobody acknowledges), chattering ${a.chattering.incidents}`,
    );
    const later = r.escalation.responders;
    if (later.length > 0) {
      lines.push(
        `${prefix}escalation if nobody acknowledges: ${r.escalation.annunciations} annunciations would reach later tiers: ${later.map((x) => `${x.responder} ${x.annunciations}`).join(', ')} (the load above counts tier 0)`,
      );
    }
  }
  for (const row of s.comparison ?? []) if (row.differs) lines.push(`differs: ${row.metric}: ${row.values.map((v) => (v === null ? '-' : String(v))).join(' vs ')}`);
  if (out !== undefined) lines.push(`report: ${out}`);
  lines.push(ADVISORY_LINE);
  return `${lines.join('\n')}\n`;
}

function fmt(x: number): string {
  return String(Number(x.toPrecision(4)));
}
