/**
 * Webhook endpoints that answered 410 Gone. The Standard Webhooks convention is that a receiver answering 410
 * wants no more deliveries; the mark is kept in Redis so that every worker process, and every later message,
 * respects it. A mark holds for the endpoint's name at the URL that answered 410: once the configuration gives the
 * name another URL, the mark no longer applies. `wearshift failed enable-webhook NAME` clears it by hand.
 */
import { createHash } from 'node:crypto';
import type { RedisConnection as Redis } from './connection.ts';

import type { DisabledEndpoints } from '../channels/channel.ts';

/** One disabled endpoint, as `wearshift failed webhooks` lists it. */
export interface DisabledEndpoint {
  readonly name: string;
  /** The URL that answered 410, without credentials or query; absent for a mark that did not record it. */
  readonly where?: string;
  readonly reason: string;
  /** Whether the mark applies to `url` (the URL the configuration gives the endpoint now). */
  appliesTo(url: string): boolean;
}

interface Mark {
  /** SHA-256 of the whole URL (credentials and query included, so that none is stored). */
  readonly url: string;
  readonly where: string;
  readonly reason: string;
}

const keyOf = (prefix: string) => `${prefix}:notify:webhooks:disabled`;
const digest = (url: string) => createHash('sha256').update(url).digest('hex');

/** The URL as a person may see it: no user info, no query (either may hold a credential). */
function shown(url: string): string {
  try {
    const u = new URL(url);
    return `${u.origin}${u.pathname}`;
  } catch {
    return '(not a URL)';
  }
}

function endpointOf(name: string, raw: string): DisabledEndpoint {
  let mark: Mark | undefined;
  try {
    const parsed = JSON.parse(raw) as Partial<Mark>;
    if (typeof parsed.url === 'string' && typeof parsed.reason === 'string') mark = { url: parsed.url, where: String(parsed.where ?? ''), reason: parsed.reason };
  } catch {
    // A mark written before marks held the URL: the reason alone, for the name at whatever URL.
  }
  if (mark === undefined) return { name, reason: raw, appliesTo: () => true };
  const m = mark;
  return { name, where: m.where, reason: m.reason, appliesTo: (url) => digest(url) === m.url };
}

export function redisDisabledEndpoints(redis: Redis, prefix: string): DisabledEndpoints {
  const key = keyOf(prefix);
  return {
    reason: async (name, url) => {
      const raw = await redis.hget(key, name);
      if (raw === null) return undefined;
      const endpoint = endpointOf(name, raw);
      return endpoint.appliesTo(url) ? endpoint.reason : undefined;
    },
    disable: async (name, url, reason) => {
      const mark: Mark = { url: digest(url), where: shown(url), reason };
      await redis.hset(key, name, JSON.stringify(mark));
    },
  };
}

/** Every endpoint marked as disabled, by name. */
export async function listDisabledEndpoints(redis: Redis, prefix: string): Promise<DisabledEndpoint[]> {
  const all = await redis.hgetall(keyOf(prefix));
  return Object.entries(all)
    .map(([name, raw]) => endpointOf(name, raw))
    .sort((a, b) => a.name.localeCompare(b.name));
}

/** Clears the mark of the endpoint; resolves false when it had none. */
export async function enableEndpoint(redis: Redis, prefix: string, name: string): Promise<boolean> {
  return (await redis.hdel(keyOf(prefix), name)) > 0;
}
