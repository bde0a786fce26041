/**
 * One notification channel: what the notify worker needs of e-mail, webhooks, MQTT or any channel added later.
 * A channel is its own folder under src/channels with a `ChannelDefinition`, registered by one line in
 * registry.ts; `tsc` fails while a kind of `CHANNEL_KINDS` has no definition there.
 */
import type { Logger } from '../telemetry/logger.ts';
import type { Channels } from '../domain/escalationConfig.ts';
import type { NotifyEffect } from '../incidents/model.ts';
import type { IncidentMessage } from '../notify/message.ts';
import type { FloodSummary } from '../notify/floodControl.ts';
import type { EmailChart } from '../notify/incidentChart.ts';

/**
 * Webhook endpoints (or other targets) a receiver asked never to call again, kept where every process sees them. A
 * mark holds for the name at the URL that asked: a name given another URL is called again.
 */
export interface DisabledEndpoints {
  /** Why the endpoint of this name at this URL is disabled; undefined while it is not. */
  reason(name: string, url: string): Promise<string | undefined>;
  disable(name: string, url: string, reason: string): Promise<void>;
}

/** What every channel may use. */
export interface ChannelContext {
  readonly logger: Logger;
  /** Where secrets named in the configuration are read. */
  readonly env: NodeJS.ProcessEnv;
  /** Longest wait for an MQTT broker's acknowledgement. Default 30 000 ms. */
  readonly mqttTimeoutMs: number;
  /** Where a 410 Gone is remembered; without it, a 410 fails only the delivery at hand. */
  readonly disabledEndpoints?: DisabledEndpoints;
  /** The zone messages show times in (`display.timeZone`). Default UTC. */
  readonly timeZone?: string;
}

/** One delivery: the effect (who, which tier), the rendered message, the attempt number and, for e-mail, the chart. */
export interface Delivery {
  readonly effect: NotifyEffect;
  readonly message: IncidentMessage;
  readonly attempt: number;
  readonly chart?: EmailChart;
}

export interface Channel {
  /**
   * Delivers one message; resolves with one line for the job's return value. Throws `DeliveryRetry` when a later
   * attempt may succeed and `DeliveryRefused` when it will not (errors.ts).
   */
  deliver(delivery: Delivery): Promise<string>;
  /** Delivers the summary of an alarm flood's held-back messages to one of its targets (src/notify/floodControl.ts). */
  deliverSummary(summary: FloodSummary, window: number, attempt: number): Promise<string>;
  close(): Promise<void>;
}

export interface ChannelDefinition {
  /** Whether the configuration names any target of this channel (otherwise it is not opened). */
  configured(channels: Channels): boolean;
  /** Opens the channel for the configuration (no connection is made before the first delivery). */
  open(channels: Channels, context: ChannelContext): Channel;
  /**
   * The configuration's references to this channel's secrets (names of environment variables, or `whsec_` values),
   * so that every log line is scrubbed of them (src/telemetry/redactText.ts) and the worker refuses to start while
   * one is missing or unusable (`checkChannelSecrets` in registry.ts).
   */
  secretRefs(channels: Channels): readonly ChannelSecret[];
}

/** One secret a channel needs, as the configuration refers to it. */
export interface ChannelSecret {
  /** The name of the environment variable that holds it, or a literal `whsec_` value (webhooks). */
  readonly ref: string;
  /** Who needs it, as the configuration names it: `channels.webhooks "plant-events"`. */
  readonly usedBy: string;
  /** Why a value will not do (too short, not a key); undefined when it will. Absent: any value that is not empty. */
  readonly problem?: (value: string) => string | undefined;
}
