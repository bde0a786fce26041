/**
 * What the worker keeps between jobs. Two implementations share this contract: Redis for the live worker and
 * memory for `wearshift replay`, so that both run the same processing code and reach the same findings.
 *
 * Identity of a result: (unit, component, sampleId, revision). Storing is idempotent on that identity; the
 * highest revision of a sample supplies its readings, lower revisions stay as history.
 */
import type { BaselineSums } from '../analysis/model.ts';
import type { Sample } from '../domain/event.ts';
import type { Finding } from '../domain/finding.ts';
import type { Measurand } from '../domain/measurands.ts';
import type { BandContribution, BandSums } from './populationSums.ts';

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
  /**
   * The component has changes that no completed evaluation covers yet. True after any change, and still true
   * on a redelivery when the first delivery stored the result but never got to schedule its evaluation.
   */
  readonly evaluationDue: boolean;
}

/** Where a result belongs beyond its component: its group and its share of the group's population statistics. */
export interface Placement {
  readonly group: string;
  readonly contributions: readonly BandContribution[];
  /** Keep the individual values (population method `percentile`), not only n, sum and sum of squares. */
  readonly keepValues: boolean;
}

export interface ComponentEntry {
  readonly unit: string;
  readonly component: string;
  readonly group: string;
  /** Distinct samples (revisions of one sample count once). */
  readonly samples: number;
  readonly lastSampledAt: string;
}

/** Band sums of one group: measurand → lower band edge (oil hours) → sums. */
export type PopulationSums = Partial<Record<Measurand, Map<number, BandSums>>>;

/** Baseline sums per measurand of one component, as its last evaluation left them. */
export type ComponentBaselines = Partial<Record<Measurand, BaselineSums>>;

/** The findings at one sample, as the latest evaluation of the component saw them. */
export interface StepRecord {
  readonly sampleId: string;
  readonly sampledAt: string;
  readonly findings: readonly Finding[];
}

/** The last step handed to the incident engine. */
export interface FedPosition {
  readonly sampleId: string;
  readonly time: number;
}

/** Proof of holding a component's evaluation lock; writes made under a lost lease are refused. */
export interface Lease {
  readonly key: string;
  readonly token: string;
}

export interface EvaluationCommit {
  /** The change mark read when the evaluation started: everything up to it is covered. */
  readonly mark: number;
  readonly fed?: FedPosition;
  /** Every step of the history; steps without findings clear what an earlier evaluation recorded for them. */
  readonly steps: readonly StepRecord[];
  readonly group: string;
  readonly baselines: ComponentBaselines;
}

export interface HistoryStore {
  /** Atomically stores the revision, updates the registry and the population sums, and marks the component for evaluation. */
  store(sample: Sample, placement: Placement): Promise<StoreOutcome>;
  /** Every stored revision of the component's samples, in no particular order. */
  revisions(ref: ComponentRef): Promise<Sample[]>;
  component(ref: ComponentRef): Promise<ComponentEntry | undefined>;
  components(): Promise<ComponentEntry[]>;
  population(group: string): Promise<PopulationSums>;
}

export interface EvaluationStore {
  /** The component's change mark: it grows with every stored change. */
  mark(ref: ComponentRef): Promise<number>;
  /** Takes the component's evaluation lock for `ttlMs`, or returns undefined while someone else holds it. */
  acquire(ref: ComponentRef, ttlMs: number): Promise<Lease | undefined>;
  /** Extends the lock; false when it was lost (expired and taken by another worker). */
  renew(lease: Lease, ttlMs: number): Promise<boolean>;
  /** Releases the lock if still held by this lease. */
  release(lease: Lease): Promise<void>;
  lastFed(ref: ComponentRef): Promise<FedPosition | undefined>;
  /** Records an evaluation atomically, only while the lease still holds; false when it was lost. */
  commit(ref: ComponentRef, lease: Lease, commit: EvaluationCommit): Promise<boolean>;
  /** Stored baseline sums of every component of the group, ordered by component key. */
  groupBaselines(group: string): Promise<Array<readonly [string, ComponentBaselines]>>;
  /** The findings log of the component, in time order. */
  findings(ref: ComponentRef): Promise<StepRecord[]>;
}

export type Storage = HistoryStore & EvaluationStore;
