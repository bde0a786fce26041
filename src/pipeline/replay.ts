/**
 * The whole pipeline in one process without Redis: every record, in file order, goes through the same storing and
 * evaluation code as in the live worker (storeResult, evaluateStored), on in-memory storage, and every component a
 * late result re-judges is evaluated again before the next record. The timeline it returns lists every incident change
 * and each sample's findings as its last judgement gives them (once each; see FindingLine), in sample-time order; the
 * store it hands back holds the
 * final state (histories, incidents), which depends only on the set of records and on when each arrived (`arrival`):
 * a result older than backfill.quietAfterDays when it arrives is quiet backfill, and an incident only ever seen in
 * quiet backfill closes on its return to normal, so that a later finding opens a new one. Responders' words on samples
 * (`sampleVerdicts`) are given as the live store takes them, each once the file has brought its sample.
 */
import type { SampleMark, Step } from '../analysis/model.ts';
import type { Config } from '../domain/config.ts';
import type { FieldIssue } from '../domain/event.ts';
import { findingKey, type Finding } from '../domain/finding.ts';
import { incidentRules } from '../incidents/policy.ts';
import type { NotifiedEntry, TimelineEntry } from '../incidents/model.ts';
import type { SourceRecord } from '../intake/fileRecords.ts';
import type { EvaluationDeps } from './evaluateStored.ts';
import type { EvaluationResult } from './evaluationResult.ts';
import type { IncidentChange } from './incidentChanges.ts';
import type { ComponentRef } from './ports.ts';
import { refusalText, wordRefusal } from './wordRefusal.ts';
import { WaitingWords } from './waitingWords.ts';
import type { SampleVerdictLine } from '../intake/sampleVerdictFile.ts';
import { MemoryStore } from './memory/memoryStore.ts';
import { settleComponent } from './settleComponent.ts';
import { InvalidResultError, storeResult, storeSample, type StoredResult } from './storeResult.ts';
import { claimedSampleId, validateResult } from '../intake/validate.ts';
import { fileConflictReason, FileRevisions } from './fileRevisions.ts';
import { NO_SEVERITY, setAsideClosing } from './liveEvent.ts';

/**
 * One finding of a sample as the sample's last judgement gives it: a sample is judged again when a result sampled
 * before it arrives later (another unit's from an earlier month changes the group statistics it is judged with; its
 * own component's is folded before it) or when it is corrected, and only that last judgement is
 * listed, each finding once (by unit, component, sample and finding key). `revised` marks a finding an earlier
 * judgement of the sample gave otherwise or not at all: incident lines made at that earlier judgement may show it
 * otherwise. A finding only earlier judgements gave is not listed (the incident lines keep what it changed).
 */
export type FindingLine = { readonly type: 'finding'; readonly quiet: boolean; readonly revised?: true } & Finding;

/**
 * One timeline entry of an incident, flat: the entry's own fields, its kind as `change`, and the incident's state and
 * severity after the evaluation as `incidentState` and `incidentSeverity` (`none` once it is closed because its evidence
 * was set aside, with the severity last told as `lastAnnouncedSeverity`). A `notified` entry's message type
 * (`wearshift.incident.opened`, ...) is `event`.
 */
export type IncidentLine = {
  readonly type: 'incident';
  readonly incidentId: string;
  readonly unit: string;
  readonly component: string;
  /** The timeline entry's kind: opened, finding, returned, acknowledged, closed, notified, ... */
  readonly change: TimelineEntry['kind'] | NotifiedEntry['kind'];
  /** For a `finding` entry: raised, severity-changed or cleared. */
  readonly findingChange?: 'raised' | 'severity-changed' | 'cleared';
  /** For a `notified` entry: the message's event type, e.g. `wearshift.incident.opened`. */
  readonly event?: string;
  readonly incidentState: string;
  readonly incidentSeverity: string;
} & Record<string, unknown>;

export type TimelineLine = FindingLine | IncidentLine;

export interface RejectedRecord {
  readonly line: number;
  readonly sampleId?: string;
  readonly errors: readonly FieldIssue[];
}

/**
 * When each result arrives:
 * - `now`: every record at the processing time, as when the file is imported now; a result sampled more than
 *   backfill.quietAfterDays before it is quiet backfill (recorded, nobody told);
 * - `sampled`: each result at its own sampling time, as if the lab's results had come in live one by one: none is
 *   backfill, whatever its age and backfill.quietAfterDays, and the processing clock (the time of notifications) is
 *   the latest sampling time met so far in the file. The processing time then only decides which sampling dates lie
 *   in the future.
 */
export type Arrival = 'now' | 'sampled';

export interface ReplayOptions {
  readonly config: Config;
  /** The processing time: what a sampling date in the future is judged by and, with arrival `now`, each record's arrival. Default: the clock when replay starts. */
  readonly now?: number;
  /** When each result arrives (see Arrival). Default `now`. */
  readonly arrival?: Arrival;
  /** Told about each rejected record as it is met. */
  readonly onRejected?: (r: RejectedRecord) => void;
  /**
   * Responders' words on samples (a file of them, intake/sampleVerdictFile.ts), each given as the API takes it once the
   * file has brought the sample that was the component's latest when it was given (its `after`, else its own sample;
   * several waiting for one sample in the file's order): refused where the sample does not take it then
   * (wordRefusal.ts), else stored with the component, written into the timelines of the incidents that hold the sample,
   * and the component judged again from that sample on. So the findings, incidents and timelines are the live store's
   * after the same results and the same words given at the same points of the history. A word whose `after` never
   * comes is given after the last record; one on a sample the file never brings is refused.
   */
  readonly sampleVerdicts?: readonly SampleVerdictLine[];
  /** Told about each word refused: its sample is not in the records, or does not take it (pipeline/wordRefusal.ts). */
  readonly onRefusedVerdict?: (r: RefusedVerdict) => void;
}

/** A word of the file that was not given, and why. */
export interface RefusedVerdict {
  readonly line: number;
  readonly unit: string;
  readonly component: string;
  readonly sampleId: string;
  readonly verdict: SampleMark;
  readonly reason: string;
}

/** Who a word without `by` is from, in the timelines. */
export const WORD_FROM_FILE = 'a file of sample verdicts';


export interface ReplayOutcome {
  readonly timeline: TimelineLine[];
  readonly records: number;
  readonly rejected: number;
  /** Words of `sampleVerdicts` refused (see onRefusedVerdict). */
  readonly refusedVerdicts: number;
  /** The final state. */
  readonly store: MemoryStore;
}

const DAY_MS = 86_400_000;

export async function replayRecords(records: AsyncIterable<SourceRecord> | Iterable<SourceRecord>, options: ReplayOptions): Promise<ReplayOutcome> {
  const { config } = options;
  const now = options.now ?? Date.now();
  const live = options.arrival === 'sampled';
  // With arrival `sampled`, the processing clock follows the sampling times met in the file (never going back).
  let clock = live ? Number.NEGATIVE_INFINITY : now;
  const store = new MemoryStore({ config, now: () => now });
  const deps: EvaluationDeps = { store, ledger: store, config, rules: incidentRules(config), now: () => clock };
  const judged = new Map<string, SampleJudgement>();
  const keyed: Array<{ key: number; line: TimelineLine }> = [];
  let count = 0;
  let rejected = 0;
  const reject = (r: RejectedRecord) => {
    rejected += 1;
    options.onRejected?.(r);
  };
  const pushChanges = (key: number, changes: readonly IncidentChange[]) => {
    for (const c of changes) {
      // A notified entry's own `type` (the message's event type) travels as `event`: `type` names the line.
      const { kind, ...withType } = c.entry;
      const { type: event, ...entry } = withType as typeof withType & { type?: string };
      keyed.push({
        key,
        line: {
          type: 'incident',
          incidentId: c.incidentId,
          unit: c.unit,
          component: c.component,
          ...entry,
          ...(event !== undefined && { event }),
          // A finding entry has a `change` of its own (raised, severity-changed, cleared): it moves aside for the kind.
          ...('change' in entry && { findingChange: entry.change }),
          change: kind,
          incidentState: c.state,
          // Closed because its evidence was set aside (withdrawn, a sample verdict): nothing of it stands, as every
          // other view says; the severity last told goes beside it.
          ...(setAsideClosing(c.closed?.how) ? { incidentSeverity: NO_SEVERITY, lastAnnouncedSeverity: c.severity } : { incidentSeverity: c.severity }),
        } as IncidentLine,
      });
    }
  };
  const onEvaluated = (result: Extract<EvaluationResult, { kind: 'evaluated' }>, ref: ComponentRef) => {
    for (const step of result.steps) judge(judged, ref.unit, ref.component, step);
    pushChanges(Math.max(...result.steps.map((s) => Date.parse(s.sampledAt))), result.changes);
  };
  // The words by the sample they wait for (`after`, else their own), each given once the file has brought it.
  const waiting = new WaitingWords(options.sampleVerdicts ?? []);
  let refusedVerdicts = 0;
  let latestSampled = Number.NEGATIVE_INFINITY;
  const refuse = (word: SampleVerdictLine, why: Parameters<typeof refusalText>[0]) => {
    refusedVerdicts += 1;
    const reason = refusalText(why, `sample "${word.sampleId}" of ${word.unit}/${word.component}`);
    options.onRefusedVerdict?.({ line: word.line, unit: word.unit, component: word.component, sampleId: word.sampleId, verdict: word.verdict, reason });
  };
  // `at`: the sampling time of the record the word is given after, where its lines go in the timeline.
  const give = async (word: SampleVerdictLine, at: number) => {
    const ref = { unit: word.unit, component: word.component };
    const sample = (await store.revisions(ref)).find((r) => r.sample.sampleId === word.sampleId)?.sample;
    const refusal = sample === undefined ? 'unknown' : wordRefusal((await store.findings(ref)).find((r) => r.sampleId === word.sampleId), word.verdict);
    if (refusal !== undefined) return refuse(word, refusal);
    await store.markSample(ref, word.sampleId, word.verdict);
    const given = word.at !== undefined ? new Date(word.at) : new Date(Number.isFinite(clock) ? clock : now);
    pushChanges(Math.max(at, sample!.time), await store.recordSampleVerdict(ref, { sampleId: word.sampleId, verdict: word.verdict, by: word.by ?? WORD_FROM_FILE, now: given }, deps.rules));
    await settleComponent(deps, ref, onEvaluated);
  };
  const quietBefore = now - config.backfill.quietAfterDays * DAY_MS;
  // Which line first held each result, to name it when the store refuses a later one with other content.
  const revisions = new FileRevisions('line');
  for await (const r of records) {
    count += 1;
    if ('issues' in r) {
      reject({ line: r.line, ...(r.sampleId !== undefined && { sampleId: r.sampleId }), errors: r.issues });
      continue;
    }
    let stored: StoredResult;
    try {
      stored = live ? await storeOnArrival(store, config, r.record, now) : await storeResult(store, config, r.record, now);
    } catch (e) {
      if (!(e instanceof InvalidResultError)) throw e;
      reject({ line: r.line, ...(e.sampleId !== undefined && { sampleId: e.sampleId }), errors: e.issues });
      continue;
    }
    const repeat = revisions.check(r.line, stored.sample);
    if (stored.outcome.status === 'conflict') {
      // The store keeps the first and refuses this one, as the live intake does: a rejected record, named with the first.
      const { sampleId, revision } = stored.sample;
      // The store begins empty, so an earlier line holds it; said plainly should that ever not be found.
      const reason = repeat.kind === 'first' ? `sample ${sampleId} revision ${revision} is already stored with different content; a correction needs a higher revision (e.g. ${revision + 1})` : fileConflictReason(stored.sample, 'line', repeat.of);
      reject({ line: r.line, sampleId: stored.sample.sampleId, errors: [{ path: 'revision', reason }] });
      continue;
    }
    if (live) clock = Math.max(clock, stored.sample.time);
    latestSampled = Math.max(latestSampled, stored.sample.time);
    if (stored.outcome.evaluationDue) await settleComponent(deps, stored.sample, onEvaluated);
    for (const word of waiting.take(stored.sample)) await give(word, stored.sample.time);
  }
  // Words whose `after` sample never came: given now, in the file's order (refused if their own sample never came either).
  for (const word of waiting.rest()) await give(word, latestSampled);
  for (const { findings, revised } of judged.values()) {
    for (const f of findings) {
      const at = Date.parse(f.sampledAt);
      keyed.push({ key: at, line: { type: 'finding', ...f, quiet: !live && at < quietBefore, ...(revised.has(findingKey(f)) && { revised: true as const }) } });
    }
  }
  // A sample's findings come before the incident changes of the same instant, which they explain. Array.prototype.sort
  // is stable: otherwise lines of one instant keep the order they were produced in.
  const rank = (l: TimelineLine) => (l.type === 'finding' ? 0 : 1);
  const timeline = keyed.sort((a, b) => a.key - b.key || rank(a.line) - rank(b.line)).map((k) => k.line);
  return { timeline, records: count, rejected, refusedVerdicts, store };
}

/** Validates a record by the processing time (dates in the future) and stores it as received at its own sampling time. */
async function storeOnArrival(store: MemoryStore, config: Config, record: unknown, now: number): Promise<StoredResult> {
  const parsed = validateResult(record, { now });
  if (!parsed.ok) throw new InvalidResultError(parsed.issues, claimedSampleId(record));
  return storeSample(store, config, parsed.sample, parsed.sample.time);
}

/** A sample's last judgement, and the keys of the findings in it an earlier judgement gave otherwise or not at all. */
interface SampleJudgement {
  findings: readonly Finding[];
  readonly revised: Set<string>;
}

/** Records a step as its sample's last judgement: a step folded again replaces the one before, finding by finding. */
function judge(judged: Map<string, SampleJudgement>, unit: string, component: string, step: Step): void {
  const id = JSON.stringify([unit, component, step.sampleId]);
  const before = judged.get(id);
  if (before === undefined) {
    judged.set(id, { findings: step.findings, revised: new Set() });
    return;
  }
  const earlier = new Map(before.findings.map((f) => [findingKey(f), JSON.stringify(f)]));
  for (const f of step.findings) if (earlier.get(findingKey(f)) !== JSON.stringify(f)) before.revised.add(findingKey(f));
  before.findings = step.findings;
}
