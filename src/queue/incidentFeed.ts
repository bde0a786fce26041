/**
 * Where evaluation steps go after the findings are recorded: the incident engine. The live worker feeds the
 * Redis incident store; replay feeds an in-memory one. Feeding is idempotent: steps the engine has judged
 * already change nothing, so a redelivered evaluation may feed them again.
 */
import type { Step } from '../analysis/model.ts';
import type { IncidentEffect, TimelineEntry } from '../incidents/model.ts';
import type { Measurand } from '../domain/measurands.ts';
import type { ComponentRef } from '../storage/storage.ts';

export interface IncidentContext {
  /** The component's group now. */
  readonly group: string;
  readonly now: Date;
  /** Steps of samples drawn before this instant are backfill: recorded, incidents updated, nobody paged. */
  readonly quietBefore: Date;
}

/** One new entry of an incident's timeline, with the incident it belongs to. */
export interface IncidentChange {
  readonly incidentId: string;
  readonly unit: string;
  readonly component: string;
  readonly measurand?: Measurand;
  /** The incident's state after the change, in words ("active, unacknowledged", "closed"). */
  readonly state: string;
  readonly severity: string;
  readonly entry: TimelineEntry;
}

export interface IncidentFeedResult {
  readonly changes: readonly IncidentChange[];
  readonly effects: readonly IncidentEffect[];
}

export interface IncidentFeed {
  apply(ref: ComponentRef, steps: readonly Step[], context: IncidentContext): Promise<IncidentFeedResult>;
}
