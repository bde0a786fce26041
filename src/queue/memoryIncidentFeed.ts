/** The incident engine over state kept in memory, for replay: the same engine the live store runs. */
import type { Step } from '../analysis/model.ts';
import { componentKey } from '../domain/event.ts';
import { applySteps } from '../incidents/applySteps.ts';
import { emptyComponentIncidents, type ComponentIncidents } from '../incidents/model.ts';
import type { IncidentRules } from '../incidents/policy.ts';
import type { ComponentRef } from '../storage/storage.ts';
import { incidentChanges } from './incidentChanges.ts';
import type { IncidentContext, IncidentFeed, IncidentFeedResult } from './incidentFeed.ts';

export class MemoryIncidentFeed implements IncidentFeed {
  private readonly states = new Map<string, ComponentIncidents>();

  constructor(private readonly rules: IncidentRules) {}

  async apply(ref: ComponentRef, steps: readonly Step[], context: IncidentContext): Promise<IncidentFeedResult> {
    const key = componentKey(ref);
    const before = this.states.get(key) ?? emptyComponentIncidents(ref.unit, ref.component);
    const { state, effects } = applySteps(before, steps, { ...context, rules: this.rules });
    this.states.set(key, state);
    return { changes: incidentChanges(before, state), effects };
  }
}
