/**
 * Live events across processes (src/runtime/liveBridge.ts) through a real Redis: the events published in one turn of
 * the event loop go out as few messages, arrive in the hub of another connection in order and complete, and a message
 * from an earlier version (one event as an object) is still taken.
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { createEventHub, type LiveEvent } from '../../src/http/eventHub.ts';
import { bridgeLiveEvents, LIVE_EVENTS_PER_MESSAGE, liveChannel, livePublisher } from '../../src/runtime/liveBridge.ts';
import { silentLogger } from '../../src/telemetry/logger.ts';
import { type RedisServer, startRedisServer } from '../helpers/redisServer.ts';

const PREFIX = 'livetest';
let redis: RedisServer;

beforeAll(async () => {
  redis = await startRedisServer();
});
afterAll(async () => {
  await redis.dispose();
});

function result(i: number): LiveEvent {
  return { type: 'result', unit: `U${i % 7}`, component: 'gearbox', sampleId: `S${i}`, sampledAt: new Date(Date.UTC(2026, 0, 1, 0, i)).toISOString() };
}

/** Resolves once `count` events have reached the hub (bounded by the test's timeout, not by a guess at speed). */
function collect(hub: ReturnType<typeof createEventHub>, count: number): Promise<LiveEvent[]> {
  const got: LiveEvent[] = [];
  return new Promise((resolve) => {
    hub.subscribe((e) => {
      got.push(e);
      if (got.length === count) resolve(got);
    });
  });
}

describe('live events between processes', () => {
  it('a burst of one turn arrives complete and in order, in a few messages instead of one per event', async () => {
    const hub = createEventHub();
    await bridgeLiveEvents(redis.client(), PREFIX, hub, silentLogger());
    // A second subscriber counts the messages on the channel itself.
    const counter = redis.client();
    let messages = 0;
    counter.on('message', () => messages++);
    await counter.subscribe(liveChannel(PREFIX));

    const publish = livePublisher(redis.client(), PREFIX, silentLogger());
    const total = 2 * LIVE_EVENTS_PER_MESSAGE + 10;
    const sent = Array.from({ length: total }, (_, i) => result(i));
    const arrived = collect(hub, total);
    for (const e of sent) publish(e);
    expect(await arrived).toEqual(sent);
    // Two full messages at once, the rest at the end of the turn: 3, where one message per event made 522.
    await new Promise<void>((resolve) => {
      const check = (): void => (messages >= 3 ? resolve() : void setTimeout(check, 10));
      check();
    });
    expect(messages).toBe(3);

    // One event alone goes out as the event itself, as an earlier version sent every event: both are read.
    const two = collect(hub, 2);
    publish(result(9999));
    await redis.client().publish(liveChannel(PREFIX), JSON.stringify(result(10000)));
    // Two connections: which of the two Redis saw first is not the point here.
    const got = await two;
    expect(got).toHaveLength(2);
    expect(got).toEqual(expect.arrayContaining([result(9999), result(10000)]));
  });
});
