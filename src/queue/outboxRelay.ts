/**
 * Moves incident effects from the incident store's outbox onto the `notify` and `escalate` queues. Job ids
 * derive from the effect keys, so an effect handed over twice (a relay that died before confirming) becomes
 * one job. Every worker process runs a relay; the outbox's claims keep them from handing out a batch twice
 * at the same time.
 */
import { createHash } from 'node:crypto';
import type { Queue } from 'bullmq';
import type { IncidentEffect, NotifyEffect, ScheduleEscalationEffect } from '../incidents/model.ts';
import type { RedisIncidents } from '../redis/redisIncidents.ts';
import type { Logger } from '../telemetry/logger.ts';

export interface EscalateJobData {
  readonly incidentId: string;
  readonly tier: number;
  readonly reason: ScheduleEscalationEffect['reason'];
  /** The effect's `at`: the check acts only while the incident's pending escalation is still due then. Absent on jobs queued before it was passed on. */
  readonly dueAt?: string;
}

export type NotifyJobData = NotifyEffect;

export interface OutboxRelaySettings {
  /** How often the outbox is looked at when nothing kicks the relay. Default 1000 ms. */
  intervalMs?: number;
}

export interface OutboxRelay {
  /** Drains now (after an evaluation or an escalation check produced effects). */
  kick(): void;
  close(): Promise<void>;
}

/** BullMQ job ids may not hold ':' (effect keys do) and must not look like integers. */
export function effectJobId(key: string): string {
  return `fx-${createHash('sha256').update(key).digest('hex').slice(0, 32)}`;
}

export async function relayEffects(effects: readonly IncidentEffect[], queues: { notify: Queue; escalate: Queue }, now: number): Promise<void> {
  const notify = effects.filter((e): e is NotifyEffect => e.kind === 'notify');
  // A backoff type BullMQ does not know itself: only then does it ask the notify worker's backoffStrategy
  // (Retry-After, full jitter from 5 s) instead of the queue's plain exponential default.
  if (notify.length > 0) await queues.notify.addBulk(notify.map((e) => ({ name: e.type, data: e, opts: { jobId: effectJobId(e.key), backoff: { type: 'delivery' } } })));
  for (const e of effects) {
    if (e.kind !== 'schedule-escalation') continue;
    const data: EscalateJobData = { incidentId: e.incidentId, tier: e.tier, reason: e.reason, dueAt: e.at };
    await queues.escalate.add('check', data, { jobId: effectJobId(e.key), delay: Math.max(0, Date.parse(e.at) - now) });
  }
  // cancel-escalations needs no job: a delayed check re-reads the incident and finds nothing due.
}

export function startOutboxRelay(store: Pick<RedisIncidents, 'drainOutbox'>, queues: { notify: Queue; escalate: Queue }, logger: Logger, settings: OutboxRelaySettings = {}): OutboxRelay {
  const intervalMs = settings.intervalMs ?? 1000;
  let running: Promise<void> | undefined;
  let again = false;
  let closed = false;
  const drain = (): Promise<void> => {
    if (running !== undefined) {
      again = true;
      return running;
    }
    running = (async () => {
      do {
        again = false;
        try {
          await store.drainOutbox((effects) => relayEffects(effects, queues, Date.now()));
        } catch (e) {
          logger.warn({ err: (e as Error).message }, 'incident outbox relay failed; will try again');
        }
      } while (again && !closed);
    })().finally(() => {
      running = undefined;
    });
    return running;
  };
  const timer = setInterval(() => void drain(), intervalMs);
  timer.unref();
  return {
    kick: () => void drain(),
    async close() {
      closed = true;
      clearInterval(timer);
      await running;
    },
  };
}
