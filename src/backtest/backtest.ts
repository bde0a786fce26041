/**
 * A backtest of one history under one or two configurations: each configuration (with the false-alarm budget put in,
 * when one is given) replays the same records through the worker's pipeline, and the runs are summarised side by side.
 */
import type { Config } from '../domain/config.ts';
import { annunciationReach, laterTierTargets, tierZeroResponders } from '../incidents/responders.ts';
import type { SourceRecord } from '../intake/fileRecords.ts';
import type { RefusedVerdict, RejectedRecord } from '../pipeline/replay.ts';
import type { SampleVerdictLine } from '../intake/sampleVerdictFile.ts';
import { detectorParameters, withBudget, type BudgetText } from './parameters.ts';
import { runBacktest, type BacktestRun } from './run.ts';
import { buildBacktestSummary, type BacktestSummary } from './summary.ts';

export interface BacktestConfiguration {
  /** How the report names it: the file name, or "built-in defaults". */
  readonly label: string;
  readonly configFile: string | null;
  readonly config: Config;
}

export interface BacktestOptions {
  /** The history's name as the report shows it. */
  readonly file: string;
  /** One configuration, or two to compare. */
  readonly configurations: readonly BacktestConfiguration[];
  /** Replaces the configured false-alarm budget (alarms and period) in every configuration. */
  readonly budget?: BudgetText;
  /** Processing time: samples dated more than a day after it are rejected as lying in the future. Default: now. */
  readonly now?: number;
  /** Told about each rejected record once (during the first run). */
  readonly onRejected?: (r: RejectedRecord) => void;
  /** Responders' words on samples, given in every run as replay gives them (replay.ts). */
  readonly sampleVerdicts?: readonly SampleVerdictLine[];
  /** Told about each word a run refused, with the configuration's label. */
  readonly onRefusedVerdict?: (r: RefusedVerdict, label: string) => void;
}

export interface Backtest {
  readonly summary: BacktestSummary;
  readonly runs: readonly BacktestRun[];
}

export async function backtest(records: readonly SourceRecord[], options: BacktestOptions): Promise<Backtest> {
  if (options.configurations.length === 0) throw new RangeError('a backtest needs a configuration');
  const runs: BacktestRun[] = [];
  const inputs = [];
  for (const [i, c] of options.configurations.entries()) {
    const config = options.budget === undefined ? c.config : withBudget(c.config, options.budget);
    const run = await runBacktest(records, {
      config,
      ...(options.now !== undefined && { now: options.now }),
      ...(i === 0 && options.onRejected !== undefined && { onRejected: options.onRejected }),
      ...(options.sampleVerdicts !== undefined && { sampleVerdicts: options.sampleVerdicts }),
      ...(options.onRefusedVerdict !== undefined && { onRefusedVerdict: (r: RefusedVerdict) => options.onRefusedVerdict!(r, c.label) }),
    });
    runs.push(run);
    inputs.push({
      label: c.label,
      configFile: c.configFile,
      budget: options.budget ?? null,
      parameters: detectorParameters(config, run.components),
      components: run.components,
      alarm: {
        thresholds: config.alarmFigures,
        responders: tierZeroResponders(config.escalation.policies),
        escalation: { targets: laterTierTargets(config.escalation.policies), reach: annunciationReach(config.escalation.policies) },
      },
    });
  }
  const summary = buildBacktestSummary({
    file: options.file,
    records: runs[0]!.records,
    rejected: runs[0]!.rejected,
    ...(options.sampleVerdicts !== undefined && { sampleVerdicts: { words: options.sampleVerdicts.length, refused: runs.map((r) => r.refusedVerdicts) } }),
    runs: inputs,
  });
  return { summary, runs };
}
