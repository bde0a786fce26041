/**
 * An incident a corrected result withdraws, as the live views see it, with real parts: results go through the
 * producer into a running worker on a private Redis; the worker opens the incident, then, on the lab's revision,
 * closes it as withdrawn and publishes its changes on the Redis live channel; an API process's bridge feeds them to
 * its hub, from where a real HTTP server streams them (GET /v1/events) and the OPC UA server shows them to a real
 * OPC UA client. Both say what the e-mail and the acknowledgement page say of such a closing: how it was closed, and
 * that no severity of it stands — the stream with severity `none` (and the severity last announced beside it), as
 * the published AsyncAPI document describes; the condition's last event with the lowest severity and a message that
 * names what no longer holds, with the caution.
 */
import { randomUUID } from 'node:crypto';
import { mkdtempSync, readFileSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { Ajv2020 } from 'ajv/dist/2020.js';
import { AttributeIds, ClientMonitoredItem, ClientSubscription, constructEventFilter, OPCUAClient, MessageSecurityMode, SecurityPolicy, TimestampsToReturn, UserTokenType, type ClientSession, type Variant } from 'node-opcua';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { ADVISORY_CAUTION } from '../../src/domain/caution.ts';
import { parseConfig } from '../../src/domain/configFile.ts';
import { OpcuaConfigSchema } from '../../src/domain/opcuaConfig.ts';
import { announcingActions, createEventHub, type EventHub } from '../../src/http/eventHub.ts';
import { buildServer, type WearshiftServer } from '../../src/http/server.ts';
import { incidentRules } from '../../src/incidents/policy.ts';
import { OpcuaAlarmServer } from '../../src/opcua/alarmServer.ts';
import { ADVISORY_TEXT } from '../../src/opcua/advisory.ts';
import { OPCUA_SEVERITY } from '../../src/opcua/conditionView.ts';
import { createResultProducer, type ResultProducer } from '../../src/queue/producer.ts';
import { startWorkers, type RunningWorkers } from '../../src/queue/workers.ts';
import { RedisIncidents } from '../../src/redis/redisIncidents.ts';
import { accessTokensFromEnv } from '../../src/runtime/accessTokensFromEnv.ts';
import { bridgeLiveEvents, livePublisher } from '../../src/runtime/liveBridge.ts';
import { silentLogger } from '../../src/telemetry/logger.ts';
import { createMetrics } from '../../src/telemetry/metrics.ts';
import { freePort, startRedisServer, type RedisServer } from '../helpers/redisServer.ts';
import { incidentEventStream } from '../helpers/liveIncidentStream.ts';

type Json = Record<string, any>; // eslint-disable-line @typescript-eslint/no-explicit-any

const PREFIX = '{setaside}';
/** Generous bounds for a busy shared machine: they end a wait only when something is broken. */
const WAIT_MS = 120_000;
const VIEWER = `viewer-${randomUUID()}`;
const env = { WS_OPCUA_WATCHER: 'watch-secret-1' };
const FIELDS = ['EventId', 'SourceName', 'Message', 'Severity', 'LastSeverity', 'Retain', 'ActiveState.Id', 'AckedState.Id', 'ConfirmedState.Id', '1:IncidentId', '1:Evidence'];
type Fields = Record<string, unknown>;

const CONFIG = parseConfig(`
groups:
  - name: dump-trucks
    match: { component: engine }
    limits: { Fe: { caution: 50, alarm: 100 } }
`);

const published = JSON.parse(readFileSync(new URL('../../schemas/asyncapi.json', import.meta.url), 'utf8')) as Json;
const ajv = new Ajv2020({ strict: false, allErrors: true });
ajv.addSchema(published.components.schemas.LiveIncidentEvent as Json, 'LiveIncidentEvent');

let redis: RedisServer;
let dir: string;
let workers: RunningWorkers;
let producer: ResultProducer;
let hub: EventHub;
let app: WearshiftServer;
let base: string;
let opcua: OpcuaAlarmServer;
let endpoint: string;

beforeAll(async () => {
  redis = await startRedisServer();
  dir = mkdtempSync(join(tmpdir(), 'wearshift-set-aside-'));
  const connection = redis.client();
  // The worker, publishing its incident changes on the live channel as `wearshift worker` does.
  workers = startWorkers({ connection, config: CONFIG, logger: silentLogger(), target: { kind: 'single', url: redis.url }, live: livePublisher(redis.client(), PREFIX, silentLogger()) }, { prefix: PREFIX, backoffMs: 50 });
  producer = createResultProducer({ connection, prefix: PREFIX });
  // The API process: the bridge feeds its hub, which the event stream and the OPC UA server both follow.
  hub = createEventHub();
  await bridgeLiveEvents(redis.client(), PREFIX, hub, silentLogger());
  app = await buildServer({ tokens: accessTokensFromEnv({ WEARSHIFT_TOKEN_VIEWER: VIEWER }), logger: silentLogger(), metrics: createMetrics({ defaultMetrics: false }), ping: async () => 'PONG', hub });
  base = await app.listen({ port: 0, host: '127.0.0.1' });
  const incidents = new RedisIncidents(redis.client(), { rules: incidentRules(CONFIG), prefix: PREFIX });
  const config = OpcuaConfigSchema.parse({
    port: await freePort(),
    host: '127.0.0.1',
    securityModes: ['None'],
    pkiDir: join(dir, 'server-pki'),
    users: [{ userName: 'watcher', passwordEnv: 'WS_OPCUA_WATCHER', role: 'viewer' }],
    refreshSeconds: 3600,
  });
  opcua = new OpcuaAlarmServer({ config, store: announcingActions(incidents, livePublisher(redis.client(), PREFIX, silentLogger())), subscribe: (l) => hub.subscribe((e) => l(e)), logger: silentLogger(), env });
  endpoint = await opcua.start();
}, 240_000);

afterAll(async () => {
  await opcua?.stop();
  await app?.close();
  await producer?.close();
  await workers?.close();
  await redis?.dispose();
  if (dir) rmSync(dir, { recursive: true, force: true });
});

/** Two results of `unit`'s engine, the second with Fe 60 above the caution level 50: an incident opens on it. */
function results(unit: string) {
  const day = (n: number) => new Date(Date.now() - n * 86_400_000).toISOString();
  const first = { unit, component: 'engine', sampleId: `${unit}-1`, revision: 0, sampledAt: day(3), readings: { Fe: 12 } };
  const second = { unit, component: 'engine', sampleId: `${unit}-2`, revision: 0, sampledAt: day(2), readings: { Fe: 60 } };
  // The lab corrects the second: Fe 20, and the finding the incident stood on is gone.
  const corrected = { ...second, revision: 1, readings: { Fe: 20 } };
  return { opening: [first, second], corrected: [corrected], incidentId: `${unit}/engine@${unit}-2` };
}

async function send(events: readonly unknown[]): Promise<void> {
  const outcomes = await producer.add(events);
  expect(outcomes.filter((o) => o.status !== 'accepted')).toEqual([]);
}


/** A viewer's session subscribed to the Server object's events; `next(pred)` resolves with the first matching event. */
async function conditionEvents() {
  const client = OPCUAClient.create({ endpointMustExist: false, securityMode: MessageSecurityMode.None, securityPolicy: SecurityPolicy.None, connectionStrategy: { maxRetry: 0, initialDelay: 100 }, requestedSessionTimeout: 120_000 });
  await client.connect(endpoint);
  const session: ClientSession = await client.createSession({ type: UserTokenType.UserName, userName: 'watcher', password: env.WS_OPCUA_WATCHER });
  const subscription = ClientSubscription.create(session, { requestedPublishingInterval: 50, requestedMaxKeepAliveCount: 20, publishingEnabled: true, maxNotificationsPerPublish: 100 });
  await new Promise<void>((resolve) => subscription.once('started', () => resolve()));
  const item = ClientMonitoredItem.create(subscription, { nodeId: 'i=2253', attributeId: AttributeIds.EventNotifier }, { samplingInterval: 0, queueSize: 1000, discardOldest: false, filter: constructEventFilter(FIELDS) }, TimestampsToReturn.Both);
  const seen: Fields[] = [];
  const waiters: { pred: (f: Fields) => boolean; resolve: (f: Fields) => void }[] = [];
  item.on('changed', (values: Variant[]) => {
    const f: Fields = Object.fromEntries(FIELDS.map((name, i) => [name, values[i]?.value]));
    seen.push(f);
    for (const w of [...waiters]) {
      if (!w.pred(f)) continue;
      waiters.splice(waiters.indexOf(w), 1);
      w.resolve(f);
    }
  });
  await new Promise<void>((resolve) => item.once('initialized', () => resolve()));
  return {
    session,
    next(pred: (f: Fields) => boolean): Promise<Fields> {
      const already = seen.find(pred);
      if (already) return Promise.resolve(already);
      return new Promise((resolve, reject) => {
        const timer = setTimeout(() => reject(new Error(`no matching condition event; saw ${JSON.stringify(seen.map((s) => [s['1:IncidentId'], s.Severity, s.Retain]))}`)), WAIT_MS);
        waiters.push({ pred, resolve: (f) => (clearTimeout(timer), resolve(f)) });
      });
    },
    close: async () => (await session.close(), await client.disconnect()),
  };
}

const textOf = (v: unknown) => (v as { text?: string | null } | null | undefined)?.text ?? '';

describe('a closing whose evidence was set aside, in the live views', () => {
  it('the event stream tells of the withdrawn closing with severity none, how it closed and the severity last announced, as the published schema says', async () => {
    const res = await fetch(`${base}/v1/events`, { headers: { authorization: `Bearer ${VIEWER}` } });
    expect(res.status).toBe(200);
    const live = incidentEventStream(res.body!, WAIT_MS);
    try {
      const { opening, corrected, incidentId } = results('D-16');
      await send(opening);
      const opened = await live.next((e) => e.incidentId === incidentId && e.change === 'opened');
      expect(opened).toMatchObject({ severity: 'caution', state: 'active, unacknowledged', advisory: ADVISORY_CAUTION });
      expect(opened.closed).toBeUndefined();
      expect(opened.lastAnnouncedSeverity).toBeUndefined();

      await send(corrected);
      const closing = await live.next((e) => e.incidentId === incidentId && e.change === 'closed');
      expect(closing).toMatchObject({
        type: 'incident',
        unit: 'D-16',
        component: 'engine',
        severity: 'none',
        lastAnnouncedSeverity: 'caution',
        state: 'closed',
        closed: { how: 'withdrawn' },
        advisory: ADVISORY_CAUTION,
      });
      const validate = ajv.getSchema('LiveIncidentEvent')!;
      expect(validate(opened), ajv.errorsText(validate.errors)).toBe(true);
      expect(validate(closing), ajv.errorsText(validate.errors)).toBe(true);
    } finally {
      await live.close();
    }
  }, 240_000);

  it("the OPC UA condition's last event says it was closed because its evidence no longer stands, at the lowest severity, with the caution", async () => {
    const feed = await conditionEvents();
    try {
      const { opening, corrected, incidentId } = results('D-17');
      await send(opening);
      const raised = await feed.next((f) => f['1:IncidentId'] === incidentId && f['ActiveState.Id'] === true);
      expect(raised).toMatchObject({ Severity: OPCUA_SEVERITY.caution, Retain: true, 'AckedState.Id': false });

      await send(corrected);
      const last = await feed.next((f) => f['1:IncidentId'] === incidentId && f.Retain === false);
      expect(last).toMatchObject({
        // OPCUA_SEVERITY_NONE: the lowest OPC UA severity, below every band a finding is shown in.
        Severity: 1,
        LastSeverity: OPCUA_SEVERITY.caution,
        'ActiveState.Id': false,
        'ConfirmedState.Id': true,
        // Nobody acknowledged it; nothing asks for it either (Retain false).
        'AckedState.Id': false,
        '1:Evidence': [],
      });
      const message = textOf(last.Message);
      expect(message).toContain('closed D-17/engine');
      expect(message).toContain('withdrawn: a late or corrected result changed the history so that this incident no longer stands');
      expect(message).toContain('the findings it stood on no longer hold: Fe (limit, caution) of sample D-17-2');
      expect(message).toContain('severity none: nothing of it stands and nothing is asked (last announced as caution)');
      expect(message.endsWith(`(${ADVISORY_TEXT})`)).toBe(true);
      // The condition is gone after its last event, as every closed incident's.
      expect(opcua.conditionOf(incidentId)).toBeUndefined();
    } finally {
      await feed.close();
    }
  }, 240_000);
});
