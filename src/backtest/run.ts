/**
 * One backtest run: the live worker's own pipeline run in-process (replayRecords: storing, evaluation, cascades
 * and the incident engine on in-memory storage, no Redis) over the records, and its final state read back — the
 * findings of every sample and every incident as the verdict stands after the last result. Every result is taken as
 * arriving live, at its own sampling time (replay's arrival `sampled`): none is quiet backfill, whatever its age, the
 * processing time and backfill.quietAfterDays, so the incidents are those production keeps when the same results
 * come in as they are sampled. The charts come from the component view.
 */
import type { FullEvaluation } from '../analysis/evaluate.ts';
import type { GroupStats } from '../analysis/model.ts';
import type { Config } from '../domain/config.ts';
import { componentKey, type Sample } from '../domain/event.ts';
import type { Finding } from '../domain/finding.ts';
import type { ComponentSettings } from '../domain/settings.ts';
import { describeState, type Incident } from '../incidents/model.ts';
import type { SourceRecord } from '../intake/fileRecords.ts';
import { componentView } from '../pipeline/componentView.ts';
import { replayRecords, type RefusedVerdict, type RejectedRecord } from '../pipeline/replay.ts';
import type { SampleVerdictLine } from '../intake/sampleVerdictFile.ts';
import type { IncidentRecord } from './summary.ts';

export interface ComponentRun {
  readonly unit: string;
  readonly component: string;
  readonly group: string;
  /** The winning revision of every sample, in time order. */
  readonly samples: readonly Sample[];
  /** The findings each sample raised when the worker judged it, by sample id (what the incident engine was fed). */
  readonly findingsBySample: ReadonlyMap<string, readonly Finding[]>;
  readonly incidents: readonly IncidentRecord[];
  readonly settings: ComponentSettings;
  readonly groupStats: GroupStats;
  /** The whole history evaluated at the end, for the chart traces and levels. */
  readonly evaluation: FullEvaluation;
}

export interface BacktestRun {
  readonly records: number;
  readonly rejected: number;
  /** Words of `sampleVerdicts` refused. */
  readonly refusedVerdicts: number;
  readonly components: readonly ComponentRun[];
}

export interface BacktestRunOptions {
  readonly config: Config;
  /** Processing time: a sample dated more than a day after it is rejected as lying in the future; nothing else depends on it. Default: now. */
  readonly now?: number;
  readonly onRejected?: (r: RejectedRecord) => void;
  /** Responders' words on samples, given as replay gives them (replay.ts). */
  readonly sampleVerdicts?: readonly SampleVerdictLine[];
  readonly onRefusedVerdict?: (r: RefusedVerdict) => void;
}

export async function runBacktest(records: readonly SourceRecord[], options: BacktestRunOptions): Promise<BacktestRun> {
  const { config } = options;
  const now = options.now ?? Date.now();
  const outcome = await replayRecords(records, {
    config,
    now,
    arrival: 'sampled',
    ...(options.onRejected !== undefined && { onRejected: options.onRejected }),
    ...(options.sampleVerdicts !== undefined && { sampleVerdicts: options.sampleVerdicts }),
    ...(options.onRefusedVerdict !== undefined && { onRefusedVerdict: options.onRefusedVerdict }),
  });
  const store = outcome.store;
  // The incidents the final verdict holds (those a late result withdrew along the way are not production's).
  const incidents = new Map<string, IncidentRecord[]>();
  for (const inc of store.incidents()) {
    if (inc.closed?.how === 'withdrawn') continue;
    const key = componentKey(inc);
    incidents.set(key, [...(incidents.get(key) ?? []), incidentRecord(inc)]);
  }
  const entries = (await store.components()).sort((a, b) => compare(componentKey(a), componentKey(b)));
  const components: ComponentRun[] = [];
  for (const entry of entries) {
    const key = componentKey(entry);
    const view = (await componentView(store, store, config, entry))!;
    components.push({
      unit: entry.unit,
      component: entry.component,
      group: view.settings.group,
      samples: view.evaluation.history.samples,
      findingsBySample: new Map(view.evaluation.steps.filter((s) => s.findings.length > 0).map((s) => [s.sampleId, s.findings])),
      incidents: (incidents.get(key) ?? []).sort((a, b) => compare(a.openedAt, b.openedAt) || compare(a.id, b.id)),
      settings: view.settings,
      groupStats: view.group ?? { group: view.settings.group, bands: {}, baselines: {} },
      evaluation: view.evaluation,
    });
  }
  return { records: outcome.records, rejected: outcome.rejected, refusedVerdicts: outcome.refusedVerdicts, components };
}

function incidentRecord(inc: Incident): IncidentRecord {
  return {
    id: inc.id,
    key: inc.key,
    unit: inc.unit,
    component: inc.component,
    group: inc.group,
    kind: inc.kind,
    measurand: inc.measurand ?? null,
    openedAt: inc.openedAt,
    lastSampledAt: inc.lastSampledAt,
    peakSeverity: inc.peakSeverity,
    state: describeState(inc),
    entries: inc.timeline,
  };
}

function compare(a: string, b: string): number {
  return a < b ? -1 : a > b ? 1 : 0;
}
