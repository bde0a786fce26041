/**
 * One backtest run. The findings and incidents come from the live worker's own pipeline run in-process
 * (replayRecords: storing, evaluation and the incident engine on in-memory storage, no Redis): the findings each
 * sample raised when it was judged on arrival, and every incident's timeline as the engine wrote it.
 * The trend charts need the stored history and the group's statistics at the end, which replay does not hand back:
 * the records are stored once more with the worker's storing step and each component evaluated once with its
 * evaluation step, so the charts show what the board would show after the last sample.
 */
import { evaluateComponent } from '../analysis/evaluate.ts';
import type { FullEvaluation } from '../analysis/evaluate.ts';
import type { GroupStats } from '../analysis/model.ts';
import type { Config } from '../domain/config.ts';
import { componentKey, type Sample } from '../domain/event.ts';
import { findingKey, maxSeverity, type Finding, type Severity } from '../domain/finding.ts';
import { isMeasurand, type Measurand } from '../domain/measurands.ts';
import { resolveSettings, type ComponentSettings } from '../domain/settings.ts';
import type { TimelineEntry } from '../incidents/model.ts';
import type { SourceRecord } from '../intake/fileRecords.ts';
import { evaluateStored, groupStatsFor } from '../queue/evaluateStored.ts';
import { replayRecords, type IncidentLine, type RejectedRecord } from '../queue/replayHistory.ts';
import { InvalidResultError, storeResult } from '../queue/storeResult.ts';
import { MemoryStorage } from '../storage/memoryStorage.ts';
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
  readonly components: readonly ComponentRun[];
}

export interface BacktestRunOptions {
  readonly config: Config;
  /** Processing time for the backfill rule; it decides only who would have been told, not what is found. Default: now. */
  readonly now?: number;
  readonly onRejected?: (r: RejectedRecord) => void;
}

export async function runBacktest(records: readonly SourceRecord[], options: BacktestRunOptions): Promise<BacktestRun> {
  const { config } = options;
  const now = options.now ?? Date.now();
  const outcome = await replayRecords(records, { config, now, ...(options.onRejected !== undefined && { onRejected: options.onRejected }) });
  const fired = new Map<string, Map<string, Map<string, Finding>>>();
  const incidentLines = new Map<string, IncidentLine[]>();
  for (const line of outcome.timeline) {
    if (line.type === 'incident') {
      const list = incidentLines.get(line.incidentId) ?? [];
      list.push(line);
      incidentLines.set(line.incidentId, list);
      continue;
    }
    const { type: _type, quiet: _quiet, ...finding } = line;
    const bySample = fired.get(componentKey(finding)) ?? new Map<string, Map<string, Finding>>();
    fired.set(componentKey(finding), bySample);
    const byKey = bySample.get(finding.sampleId) ?? new Map<string, Finding>();
    bySample.set(finding.sampleId, byKey);
    // A latest step fed again with changed findings lists that sample twice: the union is what fired there.
    if (!byKey.has(findingKey(finding))) byKey.set(findingKey(finding), finding);
  }
  const incidents = new Map<string, IncidentRecord[]>();
  for (const [id, lines] of incidentLines) {
    const record = incidentRecord(id, lines);
    const key = componentKey(record);
    incidents.set(key, [...(incidents.get(key) ?? []), record]);
  }

  const storage = await storedAndEvaluated(records, config, now);
  const entries = (await storage.components()).sort((a, b) => compare(componentKey(a), componentKey(b)));
  const components: ComponentRun[] = [];
  for (const entry of entries) {
    const key = componentKey(entry);
    const settings = resolveSettings(config, entry);
    const groupStats = await groupStatsFor(storage, settings, key);
    const evaluation = evaluateComponent(await storage.revisions(entry), settings, groupStats);
    const bySample = fired.get(key) ?? new Map<string, Map<string, Finding>>();
    components.push({
      unit: entry.unit,
      component: entry.component,
      group: settings.group,
      samples: evaluation.history.samples,
      findingsBySample: new Map([...bySample].map(([id, byKey]) => [id, [...byKey.values()]])),
      incidents: (incidents.get(key) ?? []).sort((a, b) => compare(a.openedAt, b.openedAt) || compare(a.id, b.id)),
      settings,
      groupStats,
      evaluation,
    });
  }
  return { records: outcome.records, rejected: outcome.rejected, components };
}

/** Every valid record stored, then every component evaluated once, so that group baselines and population sums are complete. */
async function storedAndEvaluated(records: readonly SourceRecord[], config: Config, now: number): Promise<MemoryStorage> {
  const storage = new MemoryStorage();
  for (const r of records) {
    if ('issues' in r) continue;
    try {
      await storeResult(storage, config, r.record, now);
    } catch (e) {
      // Already reported by the replay, which met the same record first.
      if (!(e instanceof InvalidResultError)) throw e;
    }
  }
  for (const entry of await storage.components()) await evaluateStored({ storage, config, now: () => now }, entry);
  return storage;
}

function incidentRecord(id: string, lines: readonly IncidentLine[]): IncidentRecord {
  const first = lines[0]!;
  const last = lines.at(-1)!;
  const entries = lines.map((l) => {
    const { type: _type, incidentId: _id, unit: _unit, component: _component, change, findingChange, incidentState: _state, incidentSeverity: _severity, ...rest } = l;
    return (change === 'finding' ? { kind: 'finding', change: findingChange, ...rest } : { kind: change, ...rest }) as TimelineEntry;
  });
  const opened = entries.find((x) => x.kind === 'opened');
  const sampled = entries.flatMap((x) => ('sampleId' in x ? [x.at] : [])).sort();
  const peakSeverity = lines.reduce<Severity>((p, l) => maxSeverity(p, l.incidentSeverity as Severity), 'watch');
  const key = id.slice(0, id.lastIndexOf('@'));
  const prefix = `${first.unit}/${first.component}/`;
  const rest = key.startsWith(prefix) ? key.slice(prefix.length) : '';
  return {
    id,
    unit: first.unit,
    component: first.component,
    measurand: isMeasurand(rest) ? (rest as Measurand) : null,
    openedAt: opened?.at ?? sampled[0] ?? first.at,
    lastSampledAt: sampled.at(-1) ?? last.at,
    peakSeverity,
    state: last.incidentState,
    entries,
  };
}

function compare(a: string, b: string): number {
  return a < b ? -1 : a > b ? 1 : 0;
}
