/**
 * Feeds one component's evaluation steps into its incidents: the verdict judges each step (verdict.ts), then the
 * annunciation tells what changed (escalation.ts). Steps already judged are skipped, so redelivery changes nothing.
 */
import type { ComponentForecast } from '../analysis/forecast/model.ts';
import type { Finding } from '../domain/finding.ts';
import { draftOf, type Work } from './draft.ts';
import { annunciate } from './escalation.ts';
import type { ComponentIncidents, IncidentResult } from './model.ts';
import type { IncidentRules } from './policy.ts';
import { endExpiredShelving } from './shelving.ts';
import { judgeStep } from './verdict.ts';

export interface StepContext {
  /** The component's group now; an incident takes the group of its latest step. */
  readonly group: string;
  readonly now: Date;
  /** Steps of samples drawn before this time are backfill (unless a step says whether it is): recorded in full, but nobody is notified. */
  readonly quietBefore: Date;
  readonly rules: IncidentRules;
}

/** An evaluation step as the incident engine takes it. */
export interface IncidentStep {
  readonly sampleId: string;
  readonly sampledAt: string;
  /** Sampling time in epoch ms; default Date.parse(sampledAt). */
  readonly time?: number;
  readonly unitHours?: number;
  readonly findings: readonly Finding[];
  /** The component's time-to-limit forecasts after this step, when it has findings that ask for an incident. */
  readonly forecast?: ComponentForecast;
  /** The sample arrived as backfill; default: sampled before the context's quietBefore. */
  readonly quiet?: boolean;
  /** The sample is in doubt (a sampling finding, not yet confirmed): it does not count as a clean sample of a machine incident. */
  readonly inDoubt?: boolean;
}

export function applySteps(state: ComponentIncidents, steps: readonly IncidentStep[], ctx: StepContext): IncidentResult {
  const draft = draftOf(state);
  const work: Work = { now: ctx.now, rules: ctx.rules, effects: [] };
  endExpiredShelving(draft, work);
  for (const step of steps) {
    const time = step.time ?? Date.parse(step.sampledAt);
    judgeStep(draft, { ...step, time }, { quiet: step.quiet ?? time < ctx.quietBefore.getTime(), group: ctx.group }, ctx.rules);
  }
  annunciate(Object.values(draft.incidents), work);
  const archived = draft.replaced ?? [];
  delete draft.replaced;
  return { state: draft, effects: work.effects, archived };
}
