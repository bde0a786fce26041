/** The escalate processor: a delayed escalation check falls due (the incident engine decides whether anything is). */
import type { Job, Processor } from 'bullmq';
import type { RedisIncidents } from '../../redis/redisIncidents.ts';
import type { EscalateJobData } from '../outboxRelay.ts';

export function escalateProcessor(incidents: RedisIncidents, now: () => number, onEffects: () => void): Processor<EscalateJobData> {
  return async (job: Job<EscalateJobData>) => {
    const { effects } = await incidents.applyEscalationCheck({ incidentId: job.data.incidentId, now: new Date(now()) });
    if (effects.length > 0) onEffects();
    return { effects: effects.length };
  };
}
