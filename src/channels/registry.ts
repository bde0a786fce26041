/**
 * Every notification channel, by kind: the one place a channel is registered. `satisfies` makes `tsc` fail while a
 * kind of CHANNEL_KINDS (src/domain/escalationConfig.ts) has no definition here.
 */
import { CHANNEL_KINDS, type ChannelKind, type Channels } from '../domain/escalationConfig.ts';
import type { ChannelDefinition } from './channel.ts';
import { emailChannel } from './email/emailChannel.ts';
import { mqttChannel } from './mqtt/mqttChannel.ts';
import { webhookChannel } from './webhook/webhookChannel.ts';

export const CHANNELS = {
  email: emailChannel,
  webhook: webhookChannel,
  mqtt: mqttChannel,
} as const satisfies Record<ChannelKind, ChannelDefinition>;

/** Every channel's secret references in the configuration (for the log's scrubbing). */
export function channelSecretRefs(channels: Channels): string[] {
  return CHANNEL_KINDS.flatMap((kind) => [...CHANNELS[kind].secretRefs(channels)]);
}

/** The kinds the configuration names targets for; without any, no notify worker is started. */
export function configuredChannels(channels: Channels): ChannelKind[] {
  return CHANNEL_KINDS.filter((kind) => CHANNELS[kind].configured(channels));
}
