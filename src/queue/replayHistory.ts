/**
 * The whole pipeline in one process without Redis: every record, in file order, goes through the same
 * storing and evaluation code as in the live worker (storeResult, evaluateStored), on in-memory storage and
 * an in-memory incident engine. The timeline it returns lists the findings of each newly judged step and
 * every incident change, in sample-time order.
 */
import type { Step } from '../analysis/model.ts';
import type { Config } from '../domain/config.ts';
import type { FieldIssue } from '../domain/event.ts';
import type { Finding } from '../domain/finding.ts';
import { incidentRules } from '../incidents/policy.ts';
import type { TimelineEntry } from '../incidents/model.ts';
import type { SourceRecord } from '../intake/fileRecords.ts';
import { MemoryStorage } from '../storage/memoryStorage.ts';
import { evaluateStored } from './evaluateStored.ts';
import { MemoryIncidentFeed } from './memoryIncidentFeed.ts';
import { InvalidResultError, storeResult } from './storeResult.ts';

export type FindingLine = { readonly type: 'finding'; readonly quiet: boolean } & Finding;

/**
 * One timeline entry of an incident, flat: the entry's own fields, its kind as `change`, and the incident's
 * state and severity after the evaluation as `incidentState` and `incidentSeverity`.
 */
export type IncidentLine = {
  readonly type: 'incident';
  readonly incidentId: string;
  readonly unit: string;
  readonly component: string;
  /** The timeline entry's kind: opened, finding, returned, acknowledged, closed, ... */
  readonly change: TimelineEntry['kind'];
  /** For a `finding` entry: raised, severity-changed or cleared. */
  readonly findingChange?: 'raised' | 'severity-changed' | 'cleared';
  readonly incidentState: string;
  readonly incidentSeverity: string;
} & Omit<TimelineEntry, 'kind'>;

export type TimelineLine = FindingLine | IncidentLine;

export interface RejectedRecord {
  readonly line: number;
  readonly sampleId?: string;
  readonly errors: readonly FieldIssue[];
}

export interface ReplayOptions {
  readonly config: Config;
  /** The processing time that decides what is backfill (quiet). Default: the clock when replay starts. */
  readonly now?: number;
  /** Told about each rejected record as it is met. */
  readonly onRejected?: (r: RejectedRecord) => void;
}

export interface ReplayOutcome {
  readonly timeline: TimelineLine[];
  readonly records: number;
  readonly rejected: number;
}

export async function replayRecords(records: AsyncIterable<SourceRecord> | Iterable<SourceRecord>, options: ReplayOptions): Promise<ReplayOutcome> {
  const { config } = options;
  const now = options.now ?? Date.now();
  const storage = new MemoryStorage();
  const incidents = new MemoryIncidentFeed(incidentRules(config));
  const printed = new Map<string, string>();
  const keyed: Array<{ key: number; line: TimelineLine }> = [];
  let count = 0;
  let rejected = 0;
  const reject = (r: RejectedRecord) => {
    rejected += 1;
    options.onRejected?.(r);
  };
  for await (const r of records) {
    count += 1;
    if ('issues' in r) {
      reject({ line: r.line, errors: r.issues });
      continue;
    }
    let stored;
    try {
      stored = await storeResult(storage, config, r.record, now);
    } catch (e) {
      if (!(e instanceof InvalidResultError)) throw e;
      reject({ line: r.line, ...(e.sampleId !== undefined && { sampleId: e.sampleId }), errors: e.issues });
      continue;
    }
    if (!stored.outcome.evaluationDue) continue;
    const result = await evaluateStored({ storage, config, incidents, now: () => now }, stored.sample);
    if (result.kind !== 'evaluated') continue;
    const key = Math.max(...result.fed.map((s) => Date.parse(s.sampledAt)));
    for (const step of result.fed) {
      for (const f of changedFindings(step, printed)) keyed.push({ key: Date.parse(f.sampledAt), line: { type: 'finding', ...f, quiet: Date.parse(f.sampledAt) < result.quietBefore.getTime() } });
    }
    for (const c of result.incidents.changes) {
      const { kind, ...entry } = c.entry;
      keyed.push({
        key,
        line: {
          type: 'incident',
          incidentId: c.incidentId,
          unit: c.unit,
          component: c.component,
          ...entry,
          // A finding entry has a `change` of its own (raised, severity-changed, cleared): it moves aside for the kind.
          ...('change' in entry && { findingChange: entry.change }),
          change: kind,
          incidentState: c.state,
          incidentSeverity: c.severity,
        } as IncidentLine,
      });
    }
  }
  // Array.prototype.sort is stable: lines of one instant keep the order they were produced in.
  const timeline = keyed.sort((a, b) => a.key - b.key).map((k) => k.line);
  return { timeline, records: count, rejected };
}

/** The step's findings unless exactly these were listed for its sample before (a latest step fed again). */
function changedFindings(step: Step, printed: Map<string, string>): readonly Finding[] {
  const fingerprint = JSON.stringify(step.findings);
  if (printed.get(step.sampleId) === fingerprint) return [];
  printed.set(step.sampleId, fingerprint);
  return step.findings;
}
