/**
 * Every notification channel, by kind: the one place a channel is registered. `satisfies` makes `tsc` fail while a
 * kind of CHANNEL_KINDS (src/domain/escalationConfig.ts) has no definition here.
 */
import { InputError } from '../domain/errors.ts';
import { CHANNEL_KINDS, type ChannelKind, type Channels } from '../domain/escalationConfig.ts';
import type { ChannelDefinition, ChannelSecret } from './channel.ts';
import { emailChannel } from './email/emailChannel.ts';
import { mqttChannel } from './mqtt/mqttChannel.ts';
import { ackLinkSecretRefs } from './secrets.ts';
import { webhookChannel } from './webhook/webhookChannel.ts';

export const CHANNELS = {
  email: emailChannel,
  webhook: webhookChannel,
  mqtt: mqttChannel,
} as const satisfies Record<ChannelKind, ChannelDefinition>;

/** Every channel's secret references in the configuration (for the log's scrubbing). */
export function channelSecretRefs(channels: Channels): string[] {
  return CHANNEL_KINDS.flatMap((kind) => CHANNELS[kind].secretRefs(channels).map((s) => s.ref));
}

/**
 * What is wrong with the secrets of the configured channels, one line each, naming who needs the secret, the
 * environment variable and the reason: a variable that is not set or empty, a webhook key of the wrong size, an
 * acknowledgement-link secret too short. Empty when every secret will do.
 */
export function channelSecretProblems(channels: Channels, env: NodeJS.ProcessEnv): string[] {
  return configuredChannels(channels).flatMap((kind) => secretProblems(CHANNELS[kind].secretRefs(channels), env));
}

function secretProblems(secrets: readonly ChannelSecret[], env: NodeJS.ProcessEnv): string[] {
  return secrets.flatMap(({ ref, usedBy, problem }) => {
    const literal = ref.startsWith('whsec_');
    const value = literal ? ref : env[ref];
    const source = literal ? 'the literal secret' : `environment variable ${ref}`;
    if (value === undefined) return [`${usedBy}: ${source} is not set`];
    if (value === '') return [`${usedBy}: ${source} is empty`];
    const reason = problem?.(value);
    return reason === undefined ? [] : [`${usedBy}: ${source}: ${reason}`];
  });
}

/**
 * Refuses to go on while a configured channel's secret is missing or unusable: found when the worker starts, not
 * by the first alarm, whose message could then not be sent.
 */
export function checkChannelSecrets(channels: Channels, env: NodeJS.ProcessEnv): void {
  const problems = channelSecretProblems(channels, env);
  if (problems.length > 0) throw new InputError(`notification channels: secrets missing or unusable\n${problems.map((p) => `  ${p}`).join('\n')}`);
}

/**
 * Refuses to go on while the acknowledgement-link secret is missing or unusable: the HTTP API serves the pages behind
 * the e-mailed links whenever `channels.ackLinks` is configured, and could not check a single link without it.
 */
export function checkAckLinkSecret(channels: Channels, env: NodeJS.ProcessEnv): void {
  const problems = secretProblems(ackLinkSecretRefs(channels), env);
  if (problems.length > 0) {
    throw new InputError(`acknowledgement links: the secret is missing or unusable (the API serves the acknowledgement pages while channels.ackLinks is configured)\n${problems.map((p) => `  ${p}`).join('\n')}`);
  }
}

/** The kinds the configuration names targets for; without any, no notify worker is started. */
export function configuredChannels(channels: Channels): ChannelKind[] {
  return CHANNEL_KINDS.filter((kind) => CHANNELS[kind].configured(channels));
}
