/**
 * The notification channels a worker process delivers through: each registered channel the configuration names is
 * opened once and closed with the worker.
 */
import type { Channels } from '../domain/escalationConfig.ts';
import type { ChannelKind } from '../domain/escalationConfig.ts';
import type { Logger } from '../telemetry/logger.ts';
import type { FloodSummary } from '../notify/floodControl.ts';
import type { Channel, Delivery, DisabledEndpoints } from './channel.ts';
import { DeliveryRefused } from './errors.ts';
import { CHANNELS, checkChannelSecrets, configuredChannels } from './registry.ts';

export interface NotificationChannels {
  /** Delivers one message over the channel of its effect; resolves with a line for the job's return value. */
  deliver(delivery: Delivery): Promise<string>;
  /** Delivers the summary of an alarm flood's held-back messages over the summary's channel. */
  deliverSummary(summary: FloodSummary, window: number, attempt: number): Promise<string>;
  close(): Promise<void>;
}

export interface NotificationChannelOptions {
  readonly logger: Logger;
  /** Where secrets named in the configuration are read. Default `process.env`. */
  readonly env?: NodeJS.ProcessEnv;
  /** Longest wait for an MQTT broker's acknowledgement. Default 30 000 ms. */
  readonly mqttTimeoutMs?: number;
  /** Where a 410 Gone is remembered; without it, a 410 fails only the delivery at hand. */
  readonly disabledEndpoints?: DisabledEndpoints;
  /** The zone e-mails show times in (`display.timeZone`). Default UTC. */
  readonly timeZone?: string;
}

export const DEFAULT_MQTT_TIMEOUT_MS = 30_000;

/**
 * Opens every configured channel. Throws an `InputError` naming each channel secret that is missing or unusable
 * (`checkChannelSecrets`), so that a worker with a bad secret does not start.
 */
export function notificationChannels(channels: Channels, options: NotificationChannelOptions): NotificationChannels {
  checkChannelSecrets(channels, options.env ?? process.env);
  const context = {
    logger: options.logger,
    env: options.env ?? process.env,
    mqttTimeoutMs: options.mqttTimeoutMs ?? DEFAULT_MQTT_TIMEOUT_MS,
    ...(options.disabledEndpoints !== undefined && { disabledEndpoints: options.disabledEndpoints }),
    ...(options.timeZone !== undefined && { timeZone: options.timeZone }),
  };
  const open = new Map<ChannelKind, Channel>(configuredChannels(channels).map((kind) => [kind, CHANNELS[kind].open(channels, context)]));
  return {
    async deliver(delivery) {
      const channel = open.get(delivery.effect.channel);
      if (channel === undefined) throw new DeliveryRefused(`a ${delivery.effect.channel} notification, but no ${delivery.effect.channel} channel is configured`);
      return channel.deliver(delivery);
    },
    async deliverSummary(summary, window, attempt) {
      const channel = open.get(summary.channel);
      if (channel === undefined) throw new DeliveryRefused(`a flood summary by ${summary.channel}, but no ${summary.channel} channel is configured`);
      return channel.deliverSummary(summary, window, attempt);
    },
    async close() {
      await Promise.all([...open.values()].map((c) => c.close()));
    },
  };
}
