/**
 * The notify processor: renders one message (with the trend chart for e-mail) and delivers it over its channel.
 * Failures the receiver may get over are retried with backoff, or after its Retry-After.
 */
import { UnrecoverableError, type Job, type Processor } from 'bullmq';
import { DeliveryRefused } from '../../channels/errors.ts';
import type { NotificationChannels } from '../../channels/openChannels.ts';
import type { Config } from '../../domain/config.ts';
import type { NotifyEffect } from '../../incidents/model.ts';
import type { ComponentStore, GroupLedger } from '../../pipeline/ports.ts';
import type { Logger } from '../../telemetry/logger.ts';
import { incidentChart } from '../../notify/incidentChart.ts';
import { incidentMessage } from '../../notify/incidentMessage.ts';

export interface NotifyDeps {
  readonly store: ComponentStore;
  readonly ledger: GroupLedger;
  readonly config: Config;
  readonly channels: NotificationChannels;
  readonly apiBaseUrl: string;
  readonly logger: Logger;
}

export function notifyProcessor(deps: NotifyDeps): Processor<NotifyEffect> {
  // The chart is a help, not the message: a history it cannot draw sends the mail without it.
  const emailChart = async (effect: NotifyEffect) => {
    try {
      return await incidentChart(deps.store, deps.ledger, deps.config, effect);
    } catch (e) {
      deps.logger.warn({ incidentId: effect.incidentId, err: (e as Error).message }, 'incident e-mail sent without its trend chart');
      return undefined;
    }
  };
  return async (job: Job<NotifyEffect>) => {
    const effect = job.data;
    const samples = (await deps.store.revisions(effect.incident)).map((s) => s.sample);
    const chart = effect.channel === 'email' ? await emailChart(effect) : undefined;
    try {
      return await deps.channels.deliver({ effect, message: incidentMessage(effect, samples, deps.apiBaseUrl), attempt: job.attemptsMade + 1, ...(chart && { chart }) });
    } catch (e) {
      // A refusal will come again: no retry (BullMQ's UnrecoverableError); anything else is retried with backoff.
      if (e instanceof DeliveryRefused) throw new UnrecoverableError(e.message);
      throw e;
    }
  };
}
