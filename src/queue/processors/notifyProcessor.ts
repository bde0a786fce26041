/**
 * The notify processor: renders one message (with the trend chart for e-mail) and delivers it over its channel.
 * Failures the receiver may get over are retried with backoff, or after its Retry-After. Alarm floods are handled
 * here (src/notify/floodControl.ts): beyond the target's allowance in the window, the message is held back and one
 * summary job per target and window, delayed to the window's end, lists all it held.
 */
import { UnrecoverableError, type Job, type Processor } from 'bullmq';
import { DeliveryRefused } from '../../channels/errors.ts';
import type { NotificationChannels } from '../../channels/openChannels.ts';
import type { Config } from '../../domain/config.ts';
import type { Incident, NotifyEffect } from '../../incidents/model.ts';
import { floodKey, floodWindow, heldMessage, type FloodControlSettings, type FloodTarget } from '../../notify/floodControl.ts';
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
   * Deliveries already made, by idempotency key: a job that comes again for a delivered message (handed over
   * twice after its first job was removed) sends nothing. Without it, every job is delivered.
   */
  readonly deliveries?: Pick<DeliveryLedger, 'delivered' | 'record'>;
  /**
   * The incidents as they stand now, read before each message goes out: a message the incident has outrun since it
   * was queued (an escalation after the acknowledgement, anything after shelving or closing) is not sent
   * (`withdrawnBecause`). Without it, every message is sent as it was queued.
   */
  readonly incidents?: { get(incidentId: string): Promise<Incident | undefined> };
  /** The clock a delivery is recorded with, and shelving is judged by. Default `Date.now`. */
  readonly now?: () => number;
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

export function notifyProcessor(deps: NotifyDeps): Processor<NotifyEffect | FloodSummaryJob> {
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
    const current = await deps.incidents?.get(effect.incidentId);
    const withdrawn = current === undefined ? undefined : withdrawnBecause(effect, current, (deps.now ?? Date.now)());
    if (withdrawn !== undefined) {
      deps.logger.info({ channel: effect.channel, incidentId: effect.incidentId, type: effect.type, tier: effect.tier, reason: withdrawn }, 'queued message not sent: the incident has changed since');
      return `${effect.channel} ${effect.target}: not sent, ${withdrawn}`;
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

  /** Delivers a message and records it as delivered as soon as the channel took it. */
  async function once(messageKey: string, deliver: () => Promise<string>): Promise<string> {
    const outcome = await refusedForGood(deliver);
    await deps.deliveries?.record(messageKey, (deps.now ?? Date.now)());
    return outcome;
  }
}

/**
 * Why a queued message no longer goes out, judged on the incident as it stands when the message is about to be sent
 * (a message waits in the queue for its retries, up to hours): undefined when it still goes.
 *
 * - An escalation or reminder (`escalated`) asks someone new to act: only while the incident is still active,
 *   unacknowledged, not shelved and not closed.
 * - An announcement (`opened`, `updated`) tells tier 0 of the incident or of new evidence: not while it is shelved or
 *   once it is closed. An acknowledgement that came meanwhile does not stop it: the others on tier 0 still learn of
 *   the incident, the message shows the state it was sent for, and its acknowledgement link then opens a page that
 *   says who acknowledged it.
 * - `acknowledged`, `returned` and `closed` report a change of state that has happened: they always go.
 */
export function withdrawnBecause(effect: Pick<NotifyEffect, 'type'>, incident: Pick<Incident, 'alarm' | 'acknowledged' | 'shelved' | 'closed'>, now: number): string | undefined {
  const escalation = effect.type === 'wearshift.incident.escalated';
  const announcement = effect.type === 'wearshift.incident.opened' || effect.type === 'wearshift.incident.updated';
  if (!escalation && !announcement) return undefined;
  if (incident.closed !== null) return `the incident was closed at ${incident.closed.at}`;
  if (incident.shelved !== null && Date.parse(incident.shelved.until) > now) return `the incident is shelved until ${incident.shelved.until}`;
  if (!escalation) return undefined;
  if (incident.acknowledged !== null) return `the incident was acknowledged by ${incident.acknowledged.by} at ${incident.acknowledged.at}`;
  if (incident.alarm !== 'active') return 'the incident has returned to normal';
  return undefined;
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
