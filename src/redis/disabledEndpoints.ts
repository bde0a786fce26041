/**
 * Webhook endpoints that answered 410 Gone. The Standard Webhooks convention is that a receiver answering 410
 * wants no more deliveries; the mark is kept in Redis so that every worker process, and every later message,
 * respects it until an operator removes the endpoint from the configuration or clears the mark.
 */
import type { RedisConnection as Redis } from './connection.ts';

import type { DisabledEndpoints } from '../channels/channel.ts';

export function redisDisabledEndpoints(redis: Redis, prefix: string): DisabledEndpoints {
  const key = `${prefix}:notify:webhooks:disabled`;
  return {
    reason: async (name) => (await redis.hget(key, name)) ?? undefined,
    disable: async (name, reason) => {
      await redis.hset(key, name, reason);
    },
  };
}
