/**
 * What the pipeline needs from storage, as interfaces: the same processing code runs on Redis (the live worker,
 * src/redis) and in memory (replay, backtest, tests: src/pipeline/memory). Data flows one way: a result is
 * stored, its component evaluated (the analysis fold from a checkpoint, the incident verdict, the annunciation),
 * and the evaluation committed atomically with its incident changes and their messages (an outbox).
 *
 * Identity of a result: (unit, component, sampleId, revision). Storing is idempotent on that identity; the highest
 * revision of a sample supplies its readings, lower revisions stay as history.
 */
import type { AnalysisState } from '../analysis/fold/analysisFold.ts';
import type { BaselineSums, GroupStats, SampleMark, Step } from '../analysis/model.ts';
import type { Sample } from '../domain/event.ts';
import type { Finding } from '../domain/finding.ts';
import type { Measurand } from '../domain/measurands.ts';
import type { ComponentIncidents, Incident, IncidentEffect, StepPosition } from '../incidents/model.ts';

export interface ComponentRef {
  readonly unit: string;
  readonly component: string;
}

/**
 * - `new`: the first result of this sample.
 * - `replacement`: a higher revision; its readings replace the stored ones, the older revision stays as history.
 * - `duplicate`: this sample and revision were stored already (a redelivery or a repeat): nothing changed.
 * - `conflict`: this sample and revision were stored already with different content: the stored one is kept.
 * - `superseded`: a lower revision than the one in force: kept as history only.
 */
export type StoreStatus = 'new' | 'replacement' | 'duplicate' | 'conflict' | 'superseded';

export interface StoreOutcome {
  readonly status: StoreStatus;
  /** The component has changes that no completed evaluation covers yet. */
  readonly evaluationDue: boolean;
}

/** A stored revision with the time it first arrived (backfill is judged by the age of a sample on arrival). */
export interface StoredSample {
  readonly sample: Sample;
  /** Epoch ms when this revision was first stored. */
  readonly receivedAt: number;
}

export interface ComponentEntry {
  readonly unit: string;
  readonly component: string;
  readonly group: string;
  /** Distinct samples (revisions of one sample count once). */
  readonly samples: number;
  readonly lastSampledAt: string;
}

/** The state of a component after the sample at `position`, from which the fold can go on. */
export interface Checkpoint {
  /** The last sample folded in; null before any. */
  readonly position: StepPosition | null;
  /** Samples folded in. */
  readonly count: number;
  readonly analysis: AnalysisState;
  readonly incidents: ComponentIncidents;
}

/** The findings at one sample, as the latest evaluation of the component saw them. */
export interface StepRecord {
  readonly sampleId: string;
  readonly sampledAt: string;
  readonly findings: readonly Finding[];
  readonly status?: Step['status'];
}

/** What an evaluation starts from. */
export interface EvaluationInput {
  readonly entry: ComponentEntry;
  /** The change counter read with this input: everything up to it is covered by the evaluation. */
  readonly mark: number;
  /** The earliest position whose inputs changed since the last committed evaluation; undefined when nothing changed. */
  readonly dirtyFrom?: StepPosition;
  readonly latest?: Checkpoint;
  /** What responders said of samples in doubt. */
  readonly marks: ReadonlyMap<string, SampleMark>;
  /** The component's incidents now, and the version a commit must still find. */
  readonly incidents: ComponentIncidents;
  readonly incidentsVersion: number;
  /**
   * When the component's latest incident on record opened (sampling time, ms); null when it has none. Undefined when
   * the store does not say: the run then reads the incidents on record after its start whatever it is.
   */
  readonly lastOpenedAt?: number | null;
}

/** One sample's share of its group's population statistics: per `measurand|band edge`, the value; null: no share. */
export interface SampleShare {
  readonly sampleId: string;
  /** Sampling month, `YYYY-MM` (UTC). */
  readonly month: string;
  readonly values: Readonly<Record<string, number>> | null;
}

/** A component's complete own baseline as its group pools it, with the month it was complete in. */
export interface BaselineShare {
  readonly month: string;
  readonly sums: BaselineSums;
}

export interface EvaluationCommit {
  readonly mark: number;
  readonly group: string;
  readonly latest: Checkpoint;
  /** Sparse checkpoints to add; those after `rewoundTo` are dropped first (the history changed after it). */
  readonly sparse: readonly Checkpoint[];
  readonly rewoundTo: StepPosition | null | undefined;
  /** The steps folded by this evaluation (steps without findings clear what an earlier one recorded). */
  readonly steps: readonly StepRecord[];
  /** Population shares of the samples folded by this evaluation. */
  readonly shares: readonly SampleShare[];
  /** The component's own baselines now (absent measurand: none). */
  readonly baselines: Readonly<Partial<Record<Measurand, BaselineShare>>>;
  /** The incidents after the evaluation, the version read, their effects, and incidents withdrawn. */
  readonly incidents: ComponentIncidents;
  readonly incidentsVersion: number;
  /**
   * The incidents as the input found them, whose records are on file at `incidentsVersion`: a store need not write
   * the unchanged ones again. Default: every incident is written.
   */
  readonly recorded?: ComponentIncidents;
  readonly effects: readonly IncidentEffect[];
  /** Incidents to keep on record beside the state: closed ones a new incident of their key replaced, and withdrawn ones. */
  readonly archived: readonly Incident[];
  readonly withdrawn: readonly Incident[];
  /** The latest sampling time folded, for the group's cascade. */
  readonly horizon: number;
  /**
   * Stored samples from this position on were read but not folded (a run judged up to the end of a month): they stay
   * due from there, and the commit is not settled. Default: everything read was folded.
   */
  readonly dueFrom?: StepPosition;
  /**
   * Let go of the lease in the same write when nothing changed since the input was read (the evaluation is then
   * complete, and a second look would find nothing to do). Default false.
   */
  readonly releaseWhenSettled?: boolean;
}

/**
 * What a history run (componentRun.ts) writes of its progress at the end of each sampling month, so that other units
 * judged later are judged with it: the component's shares of its group's statistics and its horizon, nothing else.
 */
export type SharesCommit = Pick<EvaluationCommit, 'group' | 'shares' | 'baselines' | 'horizon'>;

export type SharesOutcome = { readonly ok: true; readonly changedMonth?: string } | { readonly ok: false; readonly reason: 'lost-lock' };

export type CommitOutcome =
  | {
      readonly ok: true;
      /** Earliest month whose group statistics this commit changed, if any. */
      readonly changedMonth?: string;
      /** Nothing changed since the input was read: no evaluation is due (and the lease was let go when asked to). */
      readonly settled: boolean;
    }
  | { readonly ok: false; readonly reason: 'lost-lock' | 'incidents-changed' };

/** Proof of holding a component's evaluation lock; writes made under a lost lease are refused. */
export interface Lease {
  readonly key: string;
  readonly token: string;
}

/** Where a responder's word on a sample came from: as `wearshift sample-verdicts` exports it for replay. */
export interface WordGiven {
  readonly by: string;
  /** When it was given (ISO 8601). */
  readonly at: string;
  /** The component's latest judged sample when it was given; absent when none was judged yet. */
  readonly after?: string;
}

export interface ComponentStore {
  /** Stores the revision (idempotent) and marks the component for evaluation from the sample's position. */
  store(sample: Sample, group: string, receivedAt: number): Promise<StoreOutcome>;
  /** `store` for several results at once (one round trip on Redis), the outcomes in the same order. */
  storeMany(items: readonly { readonly sample: Sample; readonly group: string }[], receivedAt: number): Promise<StoreOutcome[]>;
  component(ref: ComponentRef): Promise<ComponentEntry | undefined>;
  components(): Promise<ComponentEntry[]>;
  /** Every stored revision of the component's samples, in no particular order. */
  revisions(ref: ComponentRef): Promise<StoredSample[]>;
  /** The winning revisions after `position` (all when null), in history order. */
  samplesAfter(ref: ComponentRef, position: StepPosition | null): Promise<StoredSample[]>;
  evaluationInput(ref: ComponentRef): Promise<EvaluationInput | undefined>;
  /** The latest sparse checkpoint strictly before `position`. */
  checkpointBefore(ref: ComponentRef, position: StepPosition): Promise<Checkpoint | undefined>;
  /** The latest sparse checkpoint after at most `count` samples (where a bounded view of a long history starts). */
  checkpointAtMost(ref: ComponentRef, count: number): Promise<Checkpoint | undefined>;
  acquire(ref: ComponentRef, ttlMs: number): Promise<Lease | undefined>;
  /**
   * `acquire` and, when the lock was free, `evaluationInput` in one step (one round trip on Redis). Undefined when
   * another holds the lock; `input` undefined when the component has no samples.
   */
  acquireWithInput(ref: ComponentRef, ttlMs: number): Promise<{ readonly lease: Lease; readonly input: EvaluationInput | undefined } | undefined>;
  renew(lease: Lease, ttlMs: number): Promise<boolean>;
  release(lease: Lease): Promise<void>;
  commit(ref: ComponentRef, lease: Lease, commit: EvaluationCommit): Promise<CommitOutcome>;
  /**
   * Writes only the group shares and the horizon of an evaluation still under way, while the lock holds: the
   * component's checkpoint, findings, incidents and change mark stay as they were until its `commit`.
   */
  commitShares(ref: ComponentRef, lease: Lease, commit: SharesCommit): Promise<SharesOutcome>;
  /** Marks each component for evaluation from its `from` (a late result of another component changed its group's past). */
  markDirty(marks: readonly { readonly ref: ComponentRef; readonly from: StepPosition }[]): Promise<void>;
  /**
   * Records what a responder said of a sample and marks the component for evaluation from it; `given` (who, when, and
   * the component's latest judged sample then) is kept with the mark, and goes with it when the word is taken back.
   */
  markSample(ref: ComponentRef, sampleId: string, mark: SampleMark | null, given?: WordGiven): Promise<boolean>;
  /** Who gave each word the component holds, when, and after which sample, by sample; words stored without it are absent. */
  wordsGiven(ref: ComponentRef): Promise<Map<string, WordGiven>>;
  /** The findings log of the component, in time order (steps with findings, the latest ones). */
  findings(ref: ComponentRef): Promise<StepRecord[]>;
  /**
   * The component's incidents on record that opened after `position` (all when null) and, given `before`, before that
   * position (an incident opened by a sample an evaluation left due is not that evaluation's to judge).
   */
  incidentsOpenedAfter(ref: ComponentRef, position: StepPosition | null, before?: StepPosition): Promise<Incident[]>;
}

/**
 * A group's statistics as of a month: the population bands and the pooled baseline of its other components, from
 * their results sampled (and baselines completed) before that month began. Statistics "as of the sampling time"
 * make a verdict independent of when it is computed; a month's granularity keeps them cheap to keep and to read.
 */
export interface GroupLedger {
  /** The statistics that apply to samples of `month`, without the component's own share. */
  asOf(group: string, month: string, self: ComponentRef): Promise<GroupStats>;
  /** `asOf` for each of several months (an evaluation's samples span several), by month. */
  asOfMonths(group: string, months: readonly string[], self: ComponentRef): Promise<Map<string, GroupStats>>;
  /** Notes that `self` is being evaluated up to `horizon` (epoch ms): a later change before it re-evaluates it. */
  touch(group: string, self: ComponentRef, horizon: number): Promise<void>;
  /** Components of the group evaluated up to `from` (epoch ms) or later. */
  membersAfter(group: string, from: number): Promise<ComponentRef[]>;
  /** How many components other than `self` the group holds now (every component ever evaluated in it). */
  othersIn(group: string, self: ComponentRef): Promise<number>;
}
