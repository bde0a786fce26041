/**
 * The engine's operations copy the state once and then change the copy in place: simpler to read than
 * rebuilding nested objects at every step, and the caller's state is never touched.
 */
import type { ComponentIncidents, EscalationProgress, Incident, IncidentEffect, LoggedAction, NotifiedEntry, StepPosition, TimelineEntry, Told } from './model.ts';
import type { IncidentRules } from './policy.ts';

type Mutable<T> = { -readonly [K in keyof T]: T[K] };

export type DraftIncident = Mutable<Omit<Incident, 'timeline' | 'escalation' | 'notifications' | 'told'>> & {
  timeline: TimelineEntry[];
  escalation: Mutable<EscalationProgress>;
  notifications: NotifiedEntry[];
  told: Mutable<Told>;
};

export interface DraftState {
  readonly unit: string;
  readonly component: string;
  judged: StepPosition | null;
  incidents: Record<string, DraftIncident>;
  actions: LoggedAction[];
  actionSeq: number;
  /** Closed incidents a new one of the same key replaced during this operation (they leave the state; the store keeps their records). Not persisted. */
  replaced?: DraftIncident[];
}

/** What one operation works with: the time it runs at, the rules, and the effects it collects. */
export interface Work {
  readonly now: Date;
  readonly rules: IncidentRules;
  readonly effects: IncidentEffect[];
}

export function draftOf(state: ComponentIncidents): DraftState {
  return structuredClone(state) as DraftState;
}

export function findDraft(state: DraftState, incidentId: string): DraftIncident | undefined {
  return Object.values(state.incidents).find((i) => i.id === incidentId);
}

export function isoOf(d: Date): string {
  return d.toISOString();
}
