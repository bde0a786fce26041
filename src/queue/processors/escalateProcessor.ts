/** The escalate processor: a delayed escalation check falls due (the incident engine decides whether anything is). */
import type { Job, Processor } from 'bullmq';
import type { RedisIncidents } from '../../redis/redisIncidents.ts';
import type { EscalateJobData } from '../outboxRelay.ts';

export function escalateProcessor(incidents: RedisIncidents, now: () => number, onEffects: () => void): Processor<EscalateJobData> {
  return async (job: Job<EscalateJobData>) => {
    const { incidentId, tier, reason, dueAt } = job.data;
    // The check acts only for the chain, tier and time it was scheduled for (applyEscalationCheck); a job queued
    // before the due time was passed on is matched by what it carries.
    const check = {
      incidentId,
      now: new Date(now()),
      ...(typeof tier === 'number' && { tier }),
      ...(reason === 'tier' || reason === 'repeat' || reason === 'shelving-ends' ? { reason } : {}),
      ...(typeof dueAt === 'string' && { dueAt }),
    };
    const { effects } = await incidents.applyEscalationCheck(check);
    if (effects.length > 0) onEffects();
    return { effects: effects.length };
  };
}
