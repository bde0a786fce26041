/** The incident feed of the live worker: the Redis incident store, whose commits also fill the outbox. */
import type { Step } from '../analysis/model.ts';
import type { RedisIncidentStore } from '../incidents/redisIncidentStore.ts';
import type { ComponentRef } from '../storage/storage.ts';
import { incidentChanges } from './incidentChanges.ts';
import type { IncidentContext, IncidentFeed, IncidentFeedResult } from './incidentFeed.ts';

export function redisIncidentFeed(store: RedisIncidentStore): IncidentFeed {
  return {
    async apply(ref: ComponentRef, steps: readonly Step[], context: IncidentContext): Promise<IncidentFeedResult> {
      const { before, state, effects } = await store.applySteps(ref, steps, context);
      return { changes: incidentChanges(before, state), effects };
    },
  };
}
