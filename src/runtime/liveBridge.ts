/**
 * Live events across processes: workers publish on a Redis channel, every API process forwards what it
 * receives into its in-memory hub (src/http/eventHub.ts). Pub/sub is fire-and-forget, which suits events that
 * only refresh a view: a board that missed one reloads the incident list when it reconnects.
 */
import type { RedisConnection as Redis } from '../redis/connection.ts';
import type { EventHub, LiveEvent } from '../http/eventHub.ts';
import type { Logger } from '../telemetry/logger.ts';

export function liveChannel(prefix: string): string {
  return `${prefix}:live`;
}

export function livePublisher(redis: Redis, prefix: string, logger: Logger): (event: LiveEvent) => void {
  const channel = liveChannel(prefix);
  return (event) => {
    redis.publish(channel, JSON.stringify(event)).catch((e: Error) => logger.debug({ err: e.message }, 'live event not published'));
  };
}

/** Subscribes `subscriber` (a connection of its own: a subscribed connection can do nothing else) and feeds the hub. */
export async function bridgeLiveEvents(subscriber: Redis, prefix: string, hub: EventHub, logger: Logger): Promise<void> {
  const channel = liveChannel(prefix);
  subscriber.on('message', (from: string, message: string) => {
    if (from !== channel) return;
    try {
      hub.publish(JSON.parse(message) as LiveEvent);
    } catch (e) {
      logger.warn({ err: (e as Error).message }, 'unreadable live event');
    }
  });
  await subscriber.subscribe(channel);
}
