/**
 * Live events across processes: workers publish on a Redis channel, every API process forwards what it
 * receives into its in-memory hub (src/http/eventHub.ts). Pub/sub is fire-and-forget, which suits events that
 * only refresh a view: a board that missed one reloads the incident list when it reconnects.
 *
 * The events of one turn of the event loop go out as one message (a JSON array, in order; a single event as the
 * object itself): a batch of results judged together announces each of its results and incidents, and one PUBLISH
 * per event was a Redis command and a socket write per result.
 */
import type { RedisConnection as Redis } from '../redis/connection.ts';
import type { EventHub, LiveEvent } from '../http/eventHub.ts';
import type { Logger } from '../telemetry/logger.ts';

export function liveChannel(prefix: string): string {
  return `${prefix}:live`;
}

/** Events in one message at the most; more in one turn go out as several messages, in order. */
export const LIVE_EVENTS_PER_MESSAGE = 256;

export function livePublisher(redis: Redis, prefix: string, logger: Logger): (event: LiveEvent) => void {
  const channel = liveChannel(prefix);
  let pending: LiveEvent[] = [];
  let scheduled = false;
  const flush = (): void => {
    scheduled = false;
    const events = pending;
    pending = [];
    if (events.length === 0) return;
    const message = JSON.stringify(events.length === 1 ? events[0] : events);
    redis.publish(channel, message).catch((e: Error) => logger.debug({ err: e.message, events: events.length }, 'live events not published'));
  };
  return (event) => {
    pending.push(event);
    if (pending.length >= LIVE_EVENTS_PER_MESSAGE) flush();
    else if (!scheduled) {
      scheduled = true;
      setImmediate(flush);
    }
  };
}

/** Subscribes `subscriber` (a connection of its own: a subscribed connection can do nothing else) and feeds the hub. */
export async function bridgeLiveEvents(subscriber: Redis, prefix: string, hub: EventHub, logger: Logger): Promise<void> {
  const channel = liveChannel(prefix);
  subscriber.on('message', (from: string, message: string) => {
    if (from !== channel) return;
    try {
      const parsed = JSON.parse(message) as LiveEvent | LiveEvent[];
      for (const event of Array.isArray(parsed) ? parsed : [parsed]) hub.publish(event);
    } catch (e) {
      logger.warn({ err: (e as Error).message }, 'unreadable live event');
    }
  });
  await subscriber.subscribe(channel);
}
