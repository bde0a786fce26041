/** Secrets are environment variable names in the configuration; a literal `whsec_` value is allowed for webhooks. */
import type { Channels } from '../domain/escalationConfig.ts';
import { ackSecretsProblem } from '../notify/ackLink.ts';
import type { ChannelSecret } from './channel.ts';
import { DeliveryRefused } from './errors.ts';

export function secretFrom(ref: string, env: NodeJS.ProcessEnv, what: string): string {
  if (ref.startsWith('whsec_')) return ref;
  const value = env[ref];
  if (value === undefined || value === '') throw new DeliveryRefused(`${what}: environment variable ${ref} is not set`);
  return value;
}

/**
 * The acknowledgement-link secret, when `channels.ackLinks` is configured: the e-mail channel signs links with it and
 * the HTTP API checks them with it.
 */
export function ackLinkSecretRefs(channels: Channels): ChannelSecret[] {
  return channels.ackLinks === undefined ? [] : [{ ref: channels.ackLinks.secretEnv, usedBy: 'channels.ackLinks (the link-signing secret)', problem: ackSecretsProblem }];
}
