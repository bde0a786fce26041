/**
 * The notify processor: renders one message (with the trend chart for e-mail) and delivers it over its channel.
 * Failures the receiver may get over are retried with backoff, or after its Retry-After. Alarm floods are handled
 * here (src/notify/floodControl.ts): beyond the target's allowance in the window, the message is held back and one
 * summary job per target and window, delayed to the window's end, lists all it held.
 *
 * Each channel kind has its own share of the process's deliveries (`NotifyDeps.channelSlots`): a job of a kind whose
 * share is taken is put back on the queue for a while, without counting as an attempt, so that a receiver that hangs
 * (an SMTP server trickling its replies, say) holds only its own channel's slots, never the webhooks' or MQTT's.
 */
import { DelayedError, UnrecoverableError, type Job, type Processor } from 'bullmq';
import { DeliveryRefused, DeliveryRetry } from '../../channels/errors.ts';
import type { NotificationChannels } from '../../channels/openChannels.ts';
import type { Config } from '../../domain/config.ts';
import type { ChannelKind } from '../../domain/escalationConfig.ts';
import type { NotifyEffect } from '../../incidents/model.ts';
import type { MessageWithdrawal } from '../../incidents/withdrawal.ts';
import { floodKey, floodWindow, heldMessage, type FloodControlSettings, type FloodTarget } from '../../notify/floodControl.ts';
import { incidentLiveEvent, type LiveEvent } from '../../pipeline/liveEvent.ts';
import type { ComponentStore, GroupLedger } from '../../pipeline/ports.ts';
import type { DeliveryLedger } from '../../redis/deliveryLedger.ts';
import type { FloodLedger } from '../../redis/floodLedger.ts';
import type { Logger } from '../../telemetry/logger.ts';
import { incidentChart } from '../../notify/incidentChart.ts';
import { incidentMessage } from '../../notify/incidentMessage.ts';

/** The job name of a flood summary on the notify queue. */
export const FLOOD_SUMMARY_JOB = 'wearshift.flood-summary';

export interface FloodSummaryJob extends FloodTarget {
  readonly window: number;
}

export interface NotifyDeps {
  readonly store: ComponentStore;
  readonly ledger: GroupLedger;
  readonly config: Config;
  readonly channels: NotificationChannels;
  readonly apiBaseUrl: string;
  readonly logger: Logger;
  /**
   * Deliveries already made, and messages withdrawn, by idempotency key: a job that comes again for a delivered or
   * withdrawn message (a retry, or handed over twice after its first job was removed) sends nothing. Without it,
   * every job is delivered.
   */
  readonly deliveries?: Pick<DeliveryLedger, 'delivered' | 'record' | 'withdrawn' | 'recordWithdrawn' | 'attempting' | 'attempted' | 'notTaken'>;
  /**
   * The incidents as they stand now, asked before each message goes out: a message the incident has outrun since it
   * was queued (an escalation after the acknowledgement, anything after shelving or closing: `withdrawnBecause` in
   * src/incidents/withdrawal.ts) is recorded on the incident as not sent, with why, and is not sent. Without it,
   * every message is sent as it was queued.
   */
  readonly incidents?: { withdrawMessage(effect: NotifyEffect, now: Date, attemptedAt?: Date): Promise<MessageWithdrawal | undefined> };
  /**
   * Told when a message is withdrawn (the incident's record changed), for live views: of an incident closed because
   * its evidence was set aside, with no severity standing.
   */
  readonly live?: (event: LiveEvent) => void;
  /** The clock a delivery is recorded with, and shelving is judged by. Default `Date.now`. */
  readonly now?: () => number;
  /**
   * Each channel kind's share of this process's deliveries: at most `perKind` jobs of one kind (e-mail, webhook, MQTT)
   * run at once; another job of that kind is moved back to the delayed set (BullMQ's `DelayedError`, not an attempt)
   * and comes again after `putBackMs` (see there). The worker's concurrency must exceed `perKind` for the other kinds
   * to get slots (src/queue/workers.ts gives every configured kind `perKind`). Without it, no kind is limited.
   */
  readonly channelSlots?: ChannelSlots;
  /** Alarm-flood handling; without it every message is delivered. */
  readonly flood?: {
    readonly settings: FloodControlSettings;
    readonly ledger: FloodLedger;
    /** Adds the summary job (one per target and window: the job id is its key) to run after `delayMs`. */
    scheduleSummary(job: FloodSummaryJob, jobId: string, delayMs: number): Promise<void>;
    /** Default `Date.now`. */
    readonly now?: () => number;
  };
}

export interface ChannelSlots {
  /** Jobs of one channel kind this process runs at once. */
  readonly perKind: number;
  /**
   * How long a job put back waits before it is taken again: `baseMs` doubling with each time it was put back, at most
   * `maxMs`, the second half at random (so that thousands of waiting messages of a stuck channel spread out instead of
   * coming back together). Default `PUT_BACK_DEFAULTS`.
   */
  readonly putBackMs?: { readonly baseMs: number; readonly maxMs: number };
  /** Default `Math.random`. */
  readonly random?: () => number;
}

/** 1 s, doubling, at most 30 s: a stuck channel's backlog costs a few moves per second, and a freed slot is used soon. */
export const PUT_BACK_DEFAULTS = { baseMs: 1000, maxMs: 30_000 } as const;

export function notifyProcessor(deps: NotifyDeps): Processor<NotifyEffect | FloodSummaryJob> {
  const deliver = notifyJob(deps);
  const slots = deps.channelSlots;
  if (slots === undefined) return (job) => deliver(job);
  const active = new Map<ChannelKind, number>();
  return async (job, token) => {
    const kind = (job.data as { channel: ChannelKind }).channel;
    const running = active.get(kind) ?? 0;
    if (running >= slots.perKind) {
      // Taken before this one: each start of a job counts (attemptsStarted), each failed attempt too (attemptsMade).
      const putBack = Math.max(0, (job.attemptsStarted ?? 1) - job.attemptsMade - 1);
      const { baseMs, maxMs } = slots.putBackMs ?? PUT_BACK_DEFAULTS;
      const wait = Math.min(maxMs, baseMs * 2 ** Math.min(putBack, 30));
      // BullMQ's delayed set runs on the wall clock, whatever clock the processor judges with.
      await job.moveToDelayed(Date.now() + Math.round(wait / 2 + (slots.random ?? Math.random)() * (wait / 2)), token);
      throw new DelayedError(`${kind}: all ${slots.perKind} of the channel's delivery slots are busy; put back`);
    }
    active.set(kind, running + 1);
    try {
      return await deliver(job);
    } finally {
      active.set(kind, (active.get(kind) ?? 1) - 1);
    }
  };
}

function notifyJob(deps: NotifyDeps): (job: Job<NotifyEffect | FloodSummaryJob>) => Promise<string> {
  // The chart is a help, not the message: a history it cannot draw sends the mail without it.
  const emailChart = async (effect: NotifyEffect) => {
    try {
      return await incidentChart(deps.store, deps.ledger, deps.config, effect);
    } catch (e) {
      deps.logger.warn({ incidentId: effect.incidentId, err: (e as Error).message }, 'incident e-mail sent without its trend chart');
      return undefined;
    }
  };
  return async (job: Job<NotifyEffect | FloodSummaryJob>) => {
    const flood = deps.flood;
    if (job.name === FLOOD_SUMMARY_JOB) {
      if (flood === undefined) return 'flood summary: flood control is off';
      const data = job.data as FloodSummaryJob;
      const held = await flood.ledger.held(data, data.window);
      if (held.length === 0) return 'flood summary: nothing was held back';
      const length = flood.settings.windowMinutes * 60_000;
      const summary = {
        channel: data.channel,
        target: data.target,
        window: { from: new Date(data.window * length).toISOString(), until: new Date((data.window + 1) * length).toISOString() },
        maxMessages: flood.settings.maxMessages,
        held,
      };
      const summaryKey = `flood-summary:${floodKey(data, data.window)}`;
      if (await deps.deliveries?.delivered(summaryKey)) return 'flood summary: delivered before; not sent again';
      return once(summaryKey, () => deps.channels.deliverSummary(summary, data.window, job.attemptsMade + 1));
    }
    const effect = job.data as NotifyEffect;
    if (await deps.deliveries?.delivered(effect.key)) return `${effect.channel} ${effect.target}: delivered before; not sent again`;
    const noted = await deps.deliveries?.withdrawn(effect.key);
    if (noted !== undefined) return `${effect.channel} ${effect.target}: not sent, ${noted}`;
    // An earlier attempt that ended without an answer may have reached the target: the withdrawal says so.
    const attempted = deps.incidents === undefined ? undefined : await deps.deliveries?.attempted(effect.key);
    const withdrawal = await deps.incidents?.withdrawMessage(effect, new Date((deps.now ?? Date.now)()), attempted === undefined ? undefined : new Date(attempted));
    if (withdrawal !== undefined) {
      const { reason } = withdrawal.withdrawn;
      // Recorded on the incident first (that record decides); the ledger then spares later attempts the judging.
      await deps.deliveries?.recordWithdrawn(effect.key, reason);
      if (!withdrawal.before) {
        deps.logger.info({ channel: effect.channel, incidentId: effect.incidentId, type: effect.type, tier: effect.tier, reason }, 'queued message not sent: the incident has changed since');
        deps.live?.(incidentLiveEvent(withdrawal.incident, 'message withdrawn', withdrawal.withdrawn.at));
      }
      return `${effect.channel} ${effect.target}: not sent, ${reason}`;
    }
    const samples = (await deps.store.revisions(effect.incident)).map((s) => s.sample);
    const message = incidentMessage(effect, samples, deps.apiBaseUrl);
    if (flood !== undefined) {
      const now = (flood.now ?? Date.now)();
      const target: FloodTarget = { channel: effect.channel, target: effect.target };
      const window = floodWindow(now, flood.settings);
      const position = await flood.ledger.position(target, window.index, effect.key);
      if (position > flood.settings.maxMessages) {
        await flood.ledger.hold(target, window.index, effect.key, heldMessage(message, effect.at));
        // Every held message asks for the summary; the job id makes it one per target and window.
        await flood.scheduleSummary({ ...target, window: window.index }, `flood-summary-${floodKey(target, window.index)}`, Math.max(0, window.endsAt - now));
        deps.logger.info({ channel: effect.channel, incidentId: effect.incidentId, position, maxMessages: flood.settings.maxMessages }, 'message held back by alarm-flood control');
        return `${effect.channel} ${effect.target}: held back (alarm flood: message ${position} of the window, ${flood.settings.maxMessages} allowed); listed in the summary at ${new Date(window.endsAt).toISOString()}`;
      }
    }
    const chart = effect.channel === 'email' ? await emailChart(effect) : undefined;
    return once(effect.key, () => deps.channels.deliver({ effect, message, attempt: job.attemptsMade + 1, ...(chart && { chart }) }));
  };

  /**
   * Delivers a message and records it as delivered as soon as the channel took it. The attempt is noted before the
   * channel is called, and the note taken back only when the channel's answer shows the message was not taken: an
   * attempt cut short (the worker stopped, no answer in time) leaves it, for the withdrawal to tell (see above).
   */
  async function once(messageKey: string, deliver: () => Promise<string>): Promise<string> {
    const noted = (await deps.deliveries?.attempting(messageKey, (deps.now ?? Date.now)())) === true;
    let outcome: string;
    try {
      outcome = await refusedForGood(deliver);
    } catch (e) {
      const notTaken = e instanceof UnrecoverableError || (e instanceof DeliveryRetry && e.notTaken);
      if (noted && notTaken) await deps.deliveries?.notTaken(messageKey);
      throw e;
    }
    await deps.deliveries?.record(messageKey, (deps.now ?? Date.now)());
    return outcome;
  }
}

/** A refusal will come again: no retry (BullMQ's UnrecoverableError); anything else is retried with backoff. */
async function refusedForGood(deliver: () => Promise<string>): Promise<string> {
  try {
    return await deliver();
  } catch (e) {
    if (e instanceof DeliveryRefused) throw new UnrecoverableError(e.message);
    throw e;
  }
}
