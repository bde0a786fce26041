/**
 * What an evaluation needs and what it gives back (evaluateStored.ts, componentRun.ts), with the defaults of its
 * options.
 */
import type { FoldStep } from '../analysis/fold/analysisFold.ts';
import { emptyAnalysisState } from '../analysis/fold/analysisFold.ts';
import type { Config } from '../domain/config.ts';
import { emptyComponentIncidents, type IncidentEffect, type StepPosition } from '../incidents/model.ts';
import type { IncidentRules } from '../incidents/policy.ts';
import type { IncidentChange } from './incidentChanges.ts';
import type { Checkpoint, ComponentRef, ComponentStore, GroupLedger } from './ports.ts';

export interface EvaluationDeps {
  readonly store: ComponentStore;
  readonly ledger: GroupLedger;
  readonly config: Config;
  readonly rules: IncidentRules;
  /** Processing time, epoch ms. */
  readonly now: () => number;
  /** Lifetime of the component lock, renewed at a third of it. Default 30 000 ms. */
  readonly lockTtlMs?: number;
  /** A sparse checkpoint every this many samples. Default 50. */
  readonly checkpointEvery?: number;
}

export const DEFAULT_LOCK_TTL_MS = 30_000;
export const DEFAULT_CHECKPOINT_EVERY = 50;

export type EvaluationResult =
  | { readonly kind: 'busy' }
  | { readonly kind: 'empty' }
  /** Nothing folded; `leftDue`: stored samples after the fold's limit (`evaluateStored`'s `until`) stay due. */
  | { readonly kind: 'unchanged'; readonly leftDue?: true }
  | { readonly kind: 'lost-lock' }
  | { readonly kind: 'retry' }
  | {
      readonly kind: 'evaluated';
      readonly group: string;
      /** The steps this evaluation folded, in history order (after a rewind, the earlier ones again). */
      readonly steps: readonly FoldStep[];
      /** Whether the fold started before the latest checkpoint (a late, revised or re-judged result). */
      readonly rewound: boolean;
      readonly changes: readonly IncidentChange[];
      readonly effects: readonly IncidentEffect[];
      /** Other components of the group to evaluate again, from the given position. */
      readonly cascade: readonly { readonly ref: ComponentRef; readonly from: StepPosition }[];
      /** Nothing arrived while it ran: no evaluation of the component is due now (its lock is already let go). */
      readonly settled: boolean;
      readonly durationMs: number;
    };

export function emptyCheckpoint(ref: ComponentRef): Checkpoint {
  return { position: null, count: 0, analysis: emptyAnalysisState(ref.unit, ref.component), incidents: emptyComponentIncidents(ref.unit, ref.component) };
}
