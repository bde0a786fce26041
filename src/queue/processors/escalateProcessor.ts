/** The escalate processor: a delayed escalation check falls due (the incident engine decides whether anything is). */
import { DelayedError, type Job, type Processor } from 'bullmq';
import type { RedisIncidents } from '../../redis/redisIncidents.ts';
import type { EscalateJobData } from '../outboxRelay.ts';

/** How long a check waits for its incident to be judged again (`later` of applyEscalationCheck) before it comes again. */
export const JUDGED_AGAIN_WAIT_MS = 5000;
/** How many times a check comes again for that before it is dropped (an hour at the default wait). */
export const JUDGED_AGAIN_TIMES = 720;

export function escalateProcessor(incidents: RedisIncidents, now: () => number, onEffects: () => void): Processor<EscalateJobData> {
  return async (job: Job<EscalateJobData>, token?: string) => {
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
    const { effects, later } = await incidents.applyEscalationCheck(check);
    if (later && (job.attemptsStarted ?? 1) <= JUDGED_AGAIN_TIMES) {
      // BullMQ's delayed set runs on the wall clock. Not an attempt: the check comes again as it was.
      await job.moveToDelayed(Date.now() + JUDGED_AGAIN_WAIT_MS, token);
      throw new DelayedError('the incident is being judged again; the check comes again when it is back');
    }
    if (effects.length > 0) onEffects();
    return { effects: effects.length };
  };
}
