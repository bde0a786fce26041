/**
 * Every live event about an incident closed because its evidence was set aside says no severity stands, whoever sends
 * it, with real parts on a private Redis: each sender publishes on the Redis live channel as `wearshift worker` and
 * `wearshift api` do, the API process's bridge feeds its hub, and a real HTTP server streams what arrives (GET
 * /v1/events). A worker without channels opens an incident and, on the lab's revision, withdraws it: its closing and
 * the closing message it announces (`notified`) have severity `none`; a second worker with the channels then finds the
 * announcement it queued outrun and withdraws it (`message withdrawn`), again with severity `none`, and delivers
 * only the closing. A responder rejects a bottle of new oil sent in the middle of a charge over the API: the worker
 * closes the sampling incident it opened as `sample-verdict`; taking the word back reaches the closed incident first
 * (the API's `sample-verdict` event), with severity `none` too. Each event carries the severity last announced and
 * how the incident was closed, as the published AsyncAPI document describes. Every wait is for an event, bounded only
 * to end a broken run.
 */
import { randomBytes } from 'node:crypto';
import { createServer, type Server } from 'node:http';
import type { AddressInfo } from 'node:net';
import { readFileSync } from 'node:fs';
import { Ajv2020 } from 'ajv/dist/2020.js';
import type { Queue } from 'bullmq';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { notificationChannels } from '../../src/channels/openChannels.ts';
import { ADVISORY_CAUTION } from '../../src/domain/caution.ts';
import { parseConfig } from '../../src/domain/configFile.ts';
import type { Config } from '../../src/domain/config.ts';
import { createEventHub, type EventHub } from '../../src/http/eventHub.ts';
import { buildServer, type WearshiftServer } from '../../src/http/server.ts';
import { incidentRules } from '../../src/incidents/policy.ts';
import { createResultProducer, type ResultProducer } from '../../src/queue/producer.ts';
import { openPartitionedQueues, QUEUE_NAMES, resolveQueueSettings } from '../../src/queue/queues.ts';
import { SampleVerdicts } from '../../src/queue/sampleVerdicts.ts';
import { startWorkers, type RunningWorkers } from '../../src/queue/workers.ts';
import { Partitions } from '../../src/redis/keys.ts';
import { RedisIncidents } from '../../src/redis/redisIncidents.ts';
import { RedisStore } from '../../src/redis/redisStore.ts';
import { accessTokensFromEnv } from '../../src/runtime/accessTokensFromEnv.ts';
import { bridgeLiveEvents, livePublisher } from '../../src/runtime/liveBridge.ts';
import { silentLogger } from '../../src/telemetry/logger.ts';
import { createMetrics } from '../../src/telemetry/metrics.ts';
import { startRedisServer, type RedisServer } from '../helpers/redisServer.ts';
import { incidentEventStream } from '../helpers/liveIncidentStream.ts';

type Json = Record<string, any>; // eslint-disable-line @typescript-eslint/no-explicit-any

const PREFIX = '{senders}';
/** Generous bounds for a busy shared machine: they end a wait only when something is broken. */
const WAIT_MS = 120_000;
const VIEWER = `viewer-${randomBytes(6).toString('hex')}`;
const RESPONDER = `responder-${randomBytes(6).toString('hex')}`;
const env = { LIVE_SENDERS_WEBHOOK_SECRET: `whsec_${randomBytes(24).toString('base64')}` };

const published = JSON.parse(readFileSync(new URL('../../schemas/asyncapi.json', import.meta.url), 'utf8')) as Json;
const ajv = new Ajv2020({ strict: false, allErrors: true });
ajv.addSchema(published.components.schemas.LiveIncidentEvent as Json, 'LiveIncidentEvent');

let redis: RedisServer;
let receiver: Server;
/** The CloudEvent types the webhook receiver got, with the incident each is about. */
const hooks: { type: string; incidentId: string }[] = [];
const hookWaiters: { pred: (h: { type: string; incidentId: string }) => boolean; resolve: () => void }[] = [];
let config: Config;
let workers: RunningWorkers;
let delivering: RunningWorkers | undefined;
let producer: ResultProducer;
let queues: Queue[];
let hub: EventHub;
let app: WearshiftServer;
let base: string;

beforeAll(async () => {
  redis = await startRedisServer();
  receiver = createServer((req, res) => {
    const chunks: Buffer[] = [];
    req.on('data', (c: Buffer) => chunks.push(c));
    req.on('end', () => {
      const event = JSON.parse(Buffer.concat(chunks).toString('utf8')) as { type: string; data: { incident: { id: string } } };
      const hook = { type: event.type, incidentId: event.data.incident.id };
      hooks.push(hook);
      for (const w of [...hookWaiters]) {
        if (!w.pred(hook)) continue;
        hookWaiters.splice(hookWaiters.indexOf(w), 1);
        w.resolve();
      }
      res.writeHead(204).end();
    });
  });
  await new Promise<void>((resolve) => receiver.listen(0, '127.0.0.1', () => resolve()));
  config = parseConfig(`
detection: { measurands: [Fe, Cu], runningInHours: 0, baselineIntervals: 4 }
channels:
  webhooks: [{ name: ops, url: "http://127.0.0.1:${(receiver.address() as AddressInfo).port}/hooks", secrets: [LIVE_SENDERS_WEBHOOK_SECRET] }]
escalation:
  policies: [{ name: all, tiers: [{ afterMinutes: 0, webhooks: [ops] }] }]
groups:
  - name: dump-trucks
    match: { component: engine }
    limits: { Fe: { caution: 50, alarm: 100 } }
  - name: pump-gearboxes
    match: { component: gearbox }
`);
  // The worker, without channels: what it announces waits on the notify queue.
  workers = startWorkers({ connection: redis.client(), config, logger: silentLogger(), live: livePublisher(redis.client(), PREFIX, silentLogger()) }, { prefix: PREFIX, backoffMs: 50 });
  producer = createResultProducer({ connection: redis.client(), prefix: PREFIX });
  // The API process: its bridge feeds the hub the event stream follows; its sample verdicts publish on the channel.
  hub = createEventHub();
  await bridgeLiveEvents(redis.client(), PREFIX, hub, silentLogger());
  const request = redis.client();
  const partitions = new Partitions(PREFIX, 1);
  const evaluateQueues = openPartitionedQueues(QUEUE_NAMES.evaluate, request, resolveQueueSettings({ prefix: PREFIX }), partitions);
  queues = evaluateQueues;
  const store = new RedisStore(request, { prefix: PREFIX, config });
  const incidents = new RedisIncidents(request, { rules: incidentRules(config), prefix: PREFIX });
  app = await buildServer({
    tokens: accessTokensFromEnv({ WEARSHIFT_TOKEN_VIEWER: VIEWER, WEARSHIFT_TOKEN_RESPONDER: RESPONDER }),
    logger: silentLogger(),
    metrics: createMetrics({ defaultMetrics: false }),
    ping: async () => 'PONG',
    incidents,
    sampleVerdicts: new SampleVerdicts(store, evaluateQueues, partitions, { incidents, live: livePublisher(request, PREFIX, silentLogger()) }),
    hub,
    announce: livePublisher(request, PREFIX, silentLogger()),
  });
  base = await app.listen({ port: 0, host: '127.0.0.1' });
}, 240_000);

afterAll(async () => {
  await app?.close();
  await producer?.close();
  await delivering?.close();
  await workers?.close();
  await Promise.all((queues ?? []).map((q) => q.close()));
  await new Promise<void>((resolve) => (receiver ? receiver.close(() => resolve()) : resolve()));
  await redis?.dispose();
});

async function send(events: readonly unknown[]): Promise<void> {
  const outcomes = await producer.add(events);
  expect(outcomes.filter((o) => o.status !== 'accepted')).toEqual([]);
}

function hookArrived(pred: (h: { type: string; incidentId: string }) => boolean): Promise<void> {
  if (hooks.some(pred)) return Promise.resolve();
  return new Promise((resolve, reject) => {
    const timer = setTimeout(() => reject(new Error(`no matching webhook; got ${JSON.stringify(hooks)}`)), WAIT_MS);
    hookWaiters.push({ pred, resolve: () => (clearTimeout(timer), resolve()) });
  });
}


async function openStream() {
  const res = await fetch(`${base}/v1/events`, { headers: { authorization: `Bearer ${VIEWER}` } });
  expect(res.status).toBe(200);
  return incidentEventStream(res.body!, WAIT_MS);
}

function expectPublished(event: Json): void {
  const validate = ajv.getSchema('LiveIncidentEvent')!;
  expect(validate(event), ajv.errorsText(validate.errors)).toBe(true);
}

describe('live events about an incident closed because its evidence was set aside, from every sender', () => {
  it('the worker (the closing and its message) and the notify processor of another worker (the announcement withdrawn) say severity none', async () => {
    const live = await openStream();
    try {
      const day = (n: number) => new Date(Date.now() - n * 86_400_000).toISOString();
      const first = { unit: 'D-21', component: 'engine', sampleId: 'D-21-1', revision: 0, sampledAt: day(3), readings: { Fe: 12 } };
      const second = { unit: 'D-21', component: 'engine', sampleId: 'D-21-2', revision: 0, sampledAt: day(2), readings: { Fe: 60 } };
      const incidentId = 'D-21/engine@D-21-2';
      await send([first, second]);
      const opened = await live.next((e) => e.incidentId === incidentId && e.change === 'opened');
      expect(opened).toMatchObject({ severity: 'caution', state: 'active, unacknowledged' });
      // Announced to tier 0: the message waits on the notify queue, since this worker has no channels.
      const announced = await live.next((e) => e.incidentId === incidentId && e.change === 'notified');
      expect(announced).toMatchObject({ severity: 'caution', state: 'active, unacknowledged' });
      expect(announced.closed).toBeUndefined();

      // The lab corrects Fe to 20: the finding the incident stood on is gone, and the worker withdraws it.
      await send([{ ...second, revision: 1, readings: { Fe: 20 } }]);
      const setAside = { type: 'incident', incidentId, unit: 'D-21', component: 'engine', severity: 'none', lastAnnouncedSeverity: 'caution', state: 'closed', closed: { how: 'withdrawn' }, advisory: ADVISORY_CAUTION };
      const closing = await live.next((e) => e.incidentId === incidentId && e.change === 'closed');
      expect(closing).toMatchObject(setAside);
      // The closing message the worker announces with it, told to those told of the incident.
      const closingMessage = await live.next((e) => e.incidentId === incidentId && e.change === 'notified' && e.state === 'closed');
      expect(closingMessage).toMatchObject(setAside);

      // Another worker, with the channels, takes the queue: the announcement queued before the closing is outrun.
      delivering = startWorkers(
        { connection: redis.client(), config, logger: silentLogger(), channels: notificationChannels(config.channels, { logger: silentLogger(), env }), apiBaseUrl: 'https://wearshift.plant.example', live: livePublisher(redis.client(), PREFIX, silentLogger()) },
        { prefix: PREFIX, backoffMs: 50 },
      );
      const withdrawn = await live.next((e) => e.incidentId === incidentId && e.change === 'message withdrawn');
      expect(withdrawn).toMatchObject(setAside);
      // Only the closing went out.
      await hookArrived((h) => h.incidentId === incidentId && h.type === 'wearshift.incident.closed');
      expect(hooks.filter((h) => h.incidentId === incidentId).map((h) => h.type)).toEqual(['wearshift.incident.closed']);

      for (const e of [opened, announced, closing, closingMessage, withdrawn]) expectPublished(e);
    } finally {
      await live.close();
    }
  }, 300_000);

  it("the API's sample verdicts: a word on the sample of an incident a rejection closed says severity none", async () => {
    const live = await openStream();
    try {
      const ref = { unit: 'PS8-P2', component: 'gearbox' };
      const sample = (i: number, readings: Record<string, number | string>) => ({ sampleId: `W-${i}`, ...ref, sampledAt: new Date(Date.UTC(2026, 0, 1 + i * 10, 8)).toISOString(), unitHours: 1000 + i * 250, oilHours: i * 250, readings });
      const healthy = [1, 2, 3, 4, 5].map((i) => sample(i, { Fe: 8 + 6 * i, Cu: 2 + i, Ca: 2400, Zn: 1100, P: 950, Si: 4 }));
      // A bottle of new oil in the middle of a charge: held as a sampling finding, which opens a sampling incident.
      const bottle = sample(6, { Fe: 1, Cu: '<1', Ca: 2400, Zn: 1100, P: 950, Si: 4 });
      const after = sample(7, { Fe: 52, Cu: 9, Ca: 2400, Zn: 1100, P: 950, Si: 4 });
      await send([...healthy, bottle, after]);
      const incidentId = `${ref.unit}/${ref.component}/sampling@W-6`;
      const opened = await live.next((e) => e.incidentId === incidentId && e.change === 'opened');
      const severity = opened.severity as string;
      expect(['watch', 'caution', 'alarm']).toContain(severity);

      const verdict = (body: unknown) =>
        fetch(`${base}/v1/units/${encodeURIComponent(ref.unit)}/components/${ref.component}/samples/W-6/verdict`, {
          method: 'POST',
          headers: { authorization: `Bearer ${RESPONDER}`, 'content-type': 'application/json' },
          body: JSON.stringify(body),
        });
      expect((await verdict({ verdict: 'rejected', by: 'lab desk' })).status).toBe(202);
      // The word reaches the open incident first (as it stands: its severity), then the worker closes it.
      const word = await live.next((e) => e.incidentId === incidentId && e.change === 'sample-verdict');
      expect(word).toMatchObject({ severity, state: expect.not.stringMatching(/^closed/) });
      const closedBy = { how: 'sample-verdict', by: 'lab desk', sampleId: 'W-6', verdict: 'rejected' };
      const setAside = { type: 'incident', incidentId, severity: 'none', lastAnnouncedSeverity: severity, state: 'closed', closed: closedBy, advisory: ADVISORY_CAUTION };
      const closing = await live.next((e) => e.incidentId === incidentId && e.change === 'closed');
      expect(closing).toMatchObject(setAside);

      // The word taken back reaches the closed incident's record: the API tells of it as closed, nothing standing.
      expect((await verdict({ verdict: 'withdrawn', by: 'lab desk' })).status).toBe(202);
      const takenBack = await live.next((e) => e.incidentId === incidentId && e.change === 'sample-verdict' && e.state === 'closed');
      expect(takenBack).toMatchObject(setAside);
      for (const e of [opened, word, closing, takenBack]) expectPublished(e);
    } finally {
      await live.close();
    }
  }, 300_000);
});
