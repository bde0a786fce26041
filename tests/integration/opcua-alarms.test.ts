/**
 * The OPC UA Alarms & Conditions server against a real OPC UA client (node-opcua-client, the same library) over
 * opc.tcp on 127.0.0.1, with the incidents in a real Redis. The condition model checked here is the one of
 * IEC 62541-9 (OPC UA Part 9): ActiveState, AckedState, ConfirmedState, ShelvingState, Retain, ConditionRefresh.
 */
import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import {
  AttributeIds,
  BrowseDirection,
  makeBrowsePath,
  ClientMonitoredItem,
  ClientSubscription,
  DataType,
  MessageSecurityMode,
  OPCUACertificateManager,
  OPCUAClient,
  SecurityPolicy,
  StatusCodes,
  TimestampsToReturn,
  UserTokenType,
  constructEventFilter,
  callConditionRefresh,
  type ClientSession,
  type NodeId,
  type Variant,
} from 'node-opcua';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { Step } from '../../src/analysis/model.ts';
import { ConfigSchema } from '../../src/domain/config.ts';
import { OpcuaConfigSchema } from '../../src/domain/opcuaConfig.ts';
import { announcingActions, createEventHub } from '../../src/http/eventHub.ts';
import { incidentRules } from '../../src/incidents/policy.ts';
import { incidentEvent, type LiveEvent } from '../../src/pipeline/liveEvent.ts';
import { OpcuaAlarmServer } from '../../src/opcua/alarmServer.ts';
import { ONE_SHOT_REASON } from '../../src/opcua/conditionView.ts';
import { RedisIncidents } from '../../src/redis/redisIncidents.ts';
import { bridgeLiveEvents, livePublisher } from '../../src/runtime/liveBridge.ts';
import { createLogger } from '../../src/telemetry/logger.ts';
import { waitFor } from '../helpers/processes.ts';
import { freePort, startRedisServer, type RedisServer } from '../helpers/redisServer.ts';

const PREFIX = '{opcua}';
const logger = createLogger({ level: "silent" });
const FIELDS = ['EventId', 'ConditionId', 'SourceName', 'Message', 'Severity', 'Retain', 'ActiveState', 'ActiveState.Id', 'AckedState', 'AckedState.Id', 'ConfirmedState', 'ConfirmedState.Id', 'ShelvingState.CurrentState', '1:IncidentId', '1:Evidence', 'EventType'];
type Fields = Record<string, unknown>;

let redis: RedisServer;
let store: RedisIncidents;
let opcua: OpcuaAlarmServer;
let dir: string;
let endpoint: string;
let announce: ReturnType<typeof livePublisher>;
let hub: ReturnType<typeof createEventHub>;
const env = { WS_OPCUA_OPERATOR: 'op-secret-1', WS_OPCUA_WATCHER: 'watch-secret-1' };

function step(sampleId: string, sampledAt: string, severity: 'caution' | 'alarm' | null, unit = 'PS2-P3'): Step {
  return {
    sampleId,
    sampledAt,
    findings:
      severity === null
        ? []
        : [{ unit, component: 'gearbox', group: 'gearboxes', measurand: 'Fe', rule: 'cusum', disposition: 'incident', severity, value: 7, threshold: 5, basis: 'cusum', direction: 'up', sampleId, sampledAt, explanation: 'Fe wear rate shifted up' }],
  };
}

/** Stores steps as the worker does and announces the changes on the live channel, as the worker's publisher does. */
async function judge(steps: Step[], now: Date, unit = 'PS2-P3'): Promise<void> {
  const r = await store.applySteps({ unit, component: 'gearbox' }, steps, { group: 'gearboxes', now, quietBefore: new Date(0) });
  const { incidentChanges } = await import('../../src/pipeline/incidentChanges.ts');
  for (const change of incidentChanges(r.before, r.state)) announce(incidentEvent(change));
}

async function connect(user?: { userName: string; password: string }, security: { mode: MessageSecurityMode; policy: SecurityPolicy; pki?: string } = { mode: MessageSecurityMode.None, policy: SecurityPolicy.None }, url = endpoint) {
  const client = OPCUAClient.create({
    endpointMustExist: false,
    securityMode: security.mode,
    securityPolicy: security.policy,
    connectionStrategy: { maxRetry: 0, initialDelay: 100 },
    requestedSessionTimeout: 120_000,
    ...(security.pki !== undefined && { clientCertificateManager: new OPCUACertificateManager({ rootFolder: security.pki, automaticallyAcceptUnknownCertificate: true }) }),
  });
  await client.connect(url);
  const session = await client.createSession(user === undefined ? { type: UserTokenType.Anonymous } : { type: UserTokenType.UserName, ...user });
  return { client, session, close: async () => (await session.close(), await client.disconnect()) };
}

/** Subscribes to the Server object's events; `next(pred)` resolves with the first event (seen or coming) that matches. */
async function events(session: ClientSession) {
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
    subscription,
    seen,
    next(pred: (f: Fields) => boolean, from = 0): Promise<Fields> {
      const already = seen.slice(from).find(pred);
      if (already) return Promise.resolve(already);
      return new Promise((resolve, reject) => {
        const timer = setTimeout(() => reject(new Error(`no matching event; saw ${JSON.stringify(seen.map((s) => [s['1:IncidentId'], s['AckedState.Id'], (s['ShelvingState.CurrentState'] as { text?: string })?.text]))}`)), 120_000);
        waiters.push({ pred, resolve: (f) => (clearTimeout(timer), resolve(f)) });
      });
    },
  };
}

/** The text of a LocalizedText field or value (null when it has none). */
const textOf = (v: unknown) => (v as { text?: string | null } | null | undefined)?.text ?? null;

/** Reads a variable of a condition by its browse path below the condition (as an alarm list reads the condition's state). */
async function readBelow(session: ClientSession, conditionId: NodeId, path: string): Promise<unknown> {
  const found = await session.translateBrowsePath(makeBrowsePath(conditionId, path));
  expect(found.statusCode).toEqual(StatusCodes.Good);
  return (await session.read({ nodeId: found.targets![0]!.targetId, attributeId: AttributeIds.Value })).value.value;
}

const ofIncident = (id: string) => (f: Fields) => f['1:IncidentId'] === id;
const shelvingStateOf = (f: Fields) => (f['ShelvingState.CurrentState'] as { text?: string } | undefined)?.text;

/** The next live event (the board's feed: GET /v1/events and the board pages) that matches. */
function nextLive(pred: (e: LiveEvent) => boolean): Promise<LiveEvent> {
  return new Promise((resolve, reject) => {
    const timer = setTimeout(() => (stop(), reject(new Error('no matching live event'))), 120_000);
    const stop = hub.subscribe((e) => {
      if (!pred(e)) return;
      clearTimeout(timer);
      stop();
      resolve(e);
    });
  });
}

/** The browse names below a node (every forward reference). */
async function children(session: ClientSession, nodeId: string): Promise<string[]> {
  const result = await session.browse({ nodeId, browseDirection: BrowseDirection.Forward, includeSubtypes: true, resultMask: 63 });
  return (result.references ?? []).map((r) => String(r.browseName.name));
}

async function shelvingStateNode(session: ClientSession, conditionId: NodeId): Promise<NodeId> {
  const refs = await session.browse({ nodeId: conditionId, browseDirection: BrowseDirection.Forward, resultMask: 63 });
  return refs.references!.find((r) => r.browseName.name === 'ShelvingState')!.nodeId;
}

beforeAll(async () => {
  dir = mkdtempSync(join(tmpdir(), 'wearshift-opcua-'));
  redis = await startRedisServer();
  store = new RedisIncidents(redis.client(), { rules: incidentRules(ConfigSchema.parse({})), prefix: PREFIX });
  hub = createEventHub();
  await bridgeLiveEvents(redis.client(), PREFIX, hub, logger);
  announce = livePublisher(redis.client(), PREFIX, logger);
  const port = await freePort();
  const config = OpcuaConfigSchema.parse({
    port,
    host: '127.0.0.1',
    securityModes: ['None', 'SignAndEncrypt'],
    securityPolicies: ['Basic256Sha256'],
    pkiDir: join(dir, 'server-pki'),
    users: [
      { userName: 'operator', passwordEnv: 'WS_OPCUA_OPERATOR', role: 'responder' },
      { userName: 'watcher', passwordEnv: 'WS_OPCUA_WATCHER', role: 'viewer' },
    ],
    refreshSeconds: 3600,
  });
  opcua = new OpcuaAlarmServer({ config, store: announcingActions(store, announce), subscribe: (l) => hub.subscribe((e) => l(e)), logger, env });
  endpoint = await opcua.start();
}, 240_000);

afterAll(async () => {
  await opcua?.stop();
  await redis?.dispose();
  rmSync(dir, { recursive: true, force: true });
});

describe('OPC UA alarms and conditions', () => {
  const ID = 'PS2-P3/gearbox@LAB-0100';

  it('an incident raised by the worker appears as an active, unacknowledged alarm with its evidence; the operator acknowledges it from the client and Redis has it', async () => {
    const { session, close } = await connect({ userName: 'operator', password: env.WS_OPCUA_OPERATOR });
    const feed = await events(session);
    await judge([step('LAB-0100', '2026-04-01T08:00:00Z', 'alarm')], new Date());
    const raised = await feed.next((f) => ofIncident(ID)(f) && f['ActiveState.Id'] === true);
    expect(raised).toMatchObject({ 'AckedState.Id': false, Severity: 700, Retain: true, '1:Evidence': ['Fe cusum alarm: Fe wear rate shifted up'] });
    expect((raised.Message as { text: string }).text).toContain('wearshift advises');
    expect(String(raised.SourceName)).toContain('gearbox');

    // The board follows the live feed: the acknowledgement made in the control room reaches it as any other does.
    const onBoard = nextLive((e) => e.type === 'incident' && e.incidentId === ID && e.change === 'acknowledged');
    const status = await session.acknowledgeCondition(raised.ConditionId as NodeId, raised.EventId as Buffer, 'seen from the DCS');
    expect(status).toEqual(StatusCodes.Good);
    expect(await onBoard).toMatchObject({ unit: 'PS2-P3', component: 'gearbox' });
    const stored = await store.get(ID);
    expect(stored?.acknowledged).toMatchObject({ by: 'operator (OPC UA)', note: 'seen from the DCS' });
    expect(stored?.timeline.at(-1)).toMatchObject({ kind: 'acknowledged', by: 'operator (OPC UA)' });
    await feed.next((f) => ofIncident(ID)(f) && f['AckedState.Id'] === true);
    // Acknowledging again is refused as the standard says.
    const again = await feed.next((f) => ofIncident(ID)(f) && f['AckedState.Id'] === true);
    expect(await session.acknowledgeCondition(again.ConditionId as NodeId, again.EventId as Buffer, 'twice')).toEqual(StatusCodes.BadConditionBranchAlreadyAcked);
    await close();
  }, 240_000);

  it('the two-state texts read Unacknowledged, Active, Unconfirmed on a new condition and follow its state; SourceName names unit and component, in the events and on the condition', async () => {
    const { session, close } = await connect({ userName: 'operator', password: env.WS_OPCUA_OPERATOR });
    const feed = await events(session);
    // Two units with a component of the same name: an alarm list must tell their alarms apart by SourceName.
    const first = 'PS7-P1/gearbox@LAB-0500';
    const second = 'PS7-P2/gearbox@LAB-0501';
    await judge([step('LAB-0500', '2026-05-03T08:00:00Z', 'alarm', 'PS7-P1')], new Date(), 'PS7-P1');
    await judge([step('LAB-0501', '2026-05-03T09:00:00Z', 'caution', 'PS7-P2')], new Date(), 'PS7-P2');
    const raised = await feed.next((f) => ofIncident(first)(f) && f['ActiveState.Id'] === true);
    const other = await feed.next((f) => ofIncident(second)(f) && f['ActiveState.Id'] === true);
    for (const event of [raised, other]) {
      expect(event['AckedState.Id']).toBe(false);
      expect(textOf(event.AckedState)).toBe('Unacknowledged');
      expect(textOf(event.ActiveState)).toBe('Active');
      expect(event['ConfirmedState.Id']).toBe(false);
      expect(textOf(event.ConfirmedState)).toBe('Unconfirmed');
    }
    expect(raised.SourceName).toBe('PS7-P1/gearbox');
    expect(other.SourceName).toBe('PS7-P2/gearbox');

    // The condition's own variables say the same (a client that reads instead of subscribing).
    const conditionId = raised.ConditionId as NodeId;
    expect(await readBelow(session, conditionId, '.SourceName')).toBe('PS7-P1/gearbox');
    expect(textOf(await readBelow(session, conditionId, '/AckedState'))).toBe('Unacknowledged');
    expect(textOf(await readBelow(session, conditionId, '/ConfirmedState'))).toBe('Unconfirmed');
    expect(textOf(await readBelow(session, conditionId, '/ActiveState'))).toBe('Active');

    // A client that connects later and asks for the retained conditions gets the same texts and name.
    const late = await connect({ userName: 'watcher', password: env.WS_OPCUA_WATCHER });
    const lateFeed = await events(late.session);
    expect(await callConditionRefresh(late.session, lateFeed.subscription.subscriptionId)).toEqual(StatusCodes.Good);
    const refreshed = await lateFeed.next(ofIncident(second));
    expect(textOf(refreshed.AckedState)).toBe('Unacknowledged');
    expect(refreshed.SourceName).toBe('PS7-P2/gearbox');
    await late.close();

    // Acknowledged, then confirmed (resolved): the texts follow, and SourceName stays.
    expect(await session.acknowledgeCondition(conditionId, raised.EventId as Buffer, 'seen')).toEqual(StatusCodes.Good);
    const acked = await feed.next((f) => ofIncident(first)(f) && f['AckedState.Id'] === true);
    expect(textOf(acked.AckedState)).toBe('Acknowledged');
    expect(textOf(acked.ConfirmedState)).toBe('Unconfirmed');
    expect(acked.SourceName).toBe('PS7-P1/gearbox');
    expect(textOf(await readBelow(session, conditionId, '/AckedState'))).toBe('Acknowledged');
    expect(await session.confirmCondition(conditionId, acked.EventId as Buffer, 'gearbox flushed')).toEqual(StatusCodes.Good);
    const closed = await feed.next((f) => ofIncident(first)(f) && f['ConfirmedState.Id'] === true);
    expect(textOf(closed.ConfirmedState)).toBe('Confirmed');
    expect(textOf(closed.ActiveState)).toBe('Inactive');
    expect(closed.SourceName).toBe('PS7-P1/gearbox');
    await close();
  }, 240_000);

  it('a viewer and an anonymous session may not act', async () => {
    const { session, close } = await connect({ userName: 'watcher', password: env.WS_OPCUA_WATCHER });
    const feed = await events(session);
    await callConditionRefresh(session, feed.subscription.subscriptionId);
    const shown = await feed.next(ofIncident(ID));
    const result = await session.call({ objectId: shown.ConditionId as NodeId, methodId: 'i=9113' /* AcknowledgeableConditionType.Confirm */, inputArguments: [{ dataType: 'ByteString', value: shown.EventId }, { dataType: 'LocalizedText', value: { text: 'no' } }] as never });
    expect(result.statusCode).toEqual(StatusCodes.BadUserAccessDenied);
    expect((await store.get(ID))?.closed).toBeNull();
    await close();
    await expect(connect()).rejects.toThrow();
    await expect(connect({ userName: 'operator', password: 'wrong' })).rejects.toThrow();
  }, 240_000);

  it('with opcua.anonymous: viewer an anonymous session browses and subscribes but may not act', async () => {
    const viewerServer = new OpcuaAlarmServer({
      config: OpcuaConfigSchema.parse({ port: await freePort(), host: '127.0.0.1', securityModes: ['None'], pkiDir: join(dir, 'anonymous-pki'), anonymous: 'viewer', refreshSeconds: 3600 }),
      store: announcingActions(store, announce),
      subscribe: (l) => hub.subscribe((e) => l(e)),
      logger,
      env,
    });
    const url = await viewerServer.start();
    try {
      const { session, close } = await connect(undefined, undefined, url);
      const feed = await events(session);
      expect(await callConditionRefresh(session, feed.subscription.subscriptionId)).toEqual(StatusCodes.Good);
      const shown = await feed.next(ofIncident(ID));
      expect(shown.Retain).toBe(true);
      const before = (await store.get(ID))!.timeline.length;
      expect(await session.addCommentCondition(shown.ConditionId as NodeId, shown.EventId as Buffer, 'anonymous note')).toEqual(StatusCodes.BadUserAccessDenied);
      expect(await session.acknowledgeCondition(shown.ConditionId as NodeId, shown.EventId as Buffer, 'anonymous ack')).toEqual(StatusCodes.BadUserAccessDenied);
      expect((await store.get(ID))!.timeline).toHaveLength(before);
      await close();
    } finally {
      await viewerServer.stop();
    }
  }, 240_000);

  it('each unit and component is an object under Objects/Wearshift: a component appears with its first result; its open incidents are conditions below it', async () => {
    const { session, close } = await connect({ userName: 'watcher', password: env.WS_OPCUA_WATCHER });
    announce({ type: 'result', unit: 'PS6-P2', component: 'main bearing', sampleId: 'LAB-0300', sampledAt: '2026-04-01T08:00:00Z' });
    await waitFor('unit PS6-P2 under Objects/Wearshift', async () => (await children(session, 'ns=1;s=Wearshift')).includes('PS6-P2'), 120_000);
    expect(await children(session, 'ns=1;s=Wearshift')).toContain('PS2-P3');
    expect(await children(session, 'ns=1;s=unit:PS6-P2')).toContain('main bearing');
    expect(await children(session, 'ns=1;s=unit:PS2-P3')).toContain('gearbox');
    expect(await children(session, 'ns=1;s=component:PS2-P3/gearbox')).toContain(ID);
    const count = (key: string) => session.read({ nodeId: `ns=1;s=component:${key}/OpenIncidents`, attributeId: AttributeIds.Value });
    expect((await count('PS2-P3/gearbox')).value.value).toBe(1);
    expect((await count('PS6-P2/main bearing')).value.value).toBe(0);
    await close();
  }, 240_000);

  it('a shelving made through the API shows at once; the client unshelves and shelves one-shot; ConditionRefresh after a reconnect shows the state', async () => {
    const first = await connect({ userName: 'operator', password: env.WS_OPCUA_OPERATOR });
    const feed = await events(first.session);
    const from = feed.seen.length;
    await announcingActions(store, announce).applyAction({ kind: 'shelve', incidentId: ID, by: 'R. Tanaka', until: new Date(Date.now() + 3_600_000), reason: 'gearbox swap tonight', now: new Date() });
    const shelved = await feed.next((f) => ofIncident(ID)(f) && (f['ShelvingState.CurrentState'] as { text?: string })?.text === 'TimedShelved', from);

    const shelvingState = await first.session.browse({ nodeId: shelved.ConditionId as NodeId, browseDirection: 0, resultMask: 63 });
    const shelvingId = shelvingState.references!.find((r) => r.browseName.name === 'ShelvingState')!.nodeId;
    const unshelve = await first.session.call({ objectId: shelvingId, methodId: 'i=2947' /* ShelvedStateMachineType.Unshelve */, inputArguments: [] });
    expect(unshelve.statusCode).toEqual(StatusCodes.Good);
    expect((await store.get(ID))?.shelved).toBeNull();
    expect((await store.get(ID))?.timeline.at(-1)).toMatchObject({ kind: 'unshelved', by: 'operator (OPC UA)' });

    const oneShot = await first.session.call({ objectId: shelvingId, methodId: 'i=2948' /* ShelvedStateMachineType.OneShotShelve */, inputArguments: [] });
    expect(oneShot.statusCode).toEqual(StatusCodes.Good);
    expect((await store.get(ID))?.shelved?.reason).toContain(ONE_SHOT_REASON);
    await feed.next((f) => ofIncident(ID)(f) && (f['ShelvingState.CurrentState'] as { text?: string })?.text === 'OneShotShelved');
    await first.close();

    // A client that reconnects asks for the current state of every retained condition.
    const second = await connect({ userName: 'operator', password: env.WS_OPCUA_OPERATOR });
    const again = await events(second.session);
    expect(await callConditionRefresh(second.session, again.subscription.subscriptionId)).toEqual(StatusCodes.Good);
    const refreshed = await again.next(ofIncident(ID));
    expect(refreshed).toMatchObject({ 'ActiveState.Id': true, 'AckedState.Id': true, Retain: true });
    expect((refreshed['ShelvingState.CurrentState'] as { text: string }).text).toBe('OneShotShelved');

    // The incident returns to normal: the one-shot shelving ends with it (Part 9: OneShotShelved lasts until the alarm returns to normal).
    // Acknowledged and returned, the incident closes: ConfirmedState true, Retain false.
    await judge([step('LAB-0101', '2026-04-08T08:00:00Z', null), step('LAB-0102', '2026-04-15T08:00:00Z', null), step('LAB-0103', '2026-04-22T08:00:00Z', null)], new Date());
    const closed = await again.next((f) => ofIncident(ID)(f) && f.Retain === false);
    expect(closed).toMatchObject({ 'ActiveState.Id': false, 'ConfirmedState.Id': true });
    await second.close();
  }, 240_000);

  it('Confirm from the client resolves an acknowledged incident; AddComment adds a note', async () => {
    const { session, close } = await connect({ userName: 'operator', password: env.WS_OPCUA_OPERATOR });
    const feed = await events(session);
    const id = 'PS2-P4/gearbox@LAB-0200';
    await judge([step('LAB-0200', '2026-05-01T08:00:00Z', 'caution', 'PS2-P4')], new Date(), 'PS2-P4');
    const raised = await feed.next((f) => ofIncident(id)(f) && f['ActiveState.Id'] === true);
    expect(raised.Severity).toBe(500);
    expect(await session.addCommentCondition(raised.ConditionId as NodeId, raised.EventId as Buffer, 'lab asked for a re-sample')).toEqual(StatusCodes.Good);
    expect((await store.get(id))?.timeline.at(-1)).toMatchObject({ kind: 'note', by: 'operator (OPC UA)', note: 'lab asked for a re-sample' });
    const noted = await feed.next((f) => ofIncident(id)(f) && f.EventId !== raised.EventId);
    expect(await session.confirmCondition(noted.ConditionId as NodeId, noted.EventId as Buffer, 'not acknowledged yet')).toEqual(StatusCodes.BadInvalidState);
    expect(await session.acknowledgeCondition(noted.ConditionId as NodeId, noted.EventId as Buffer, 'ok')).toEqual(StatusCodes.Good);
    const acked = await feed.next((f) => ofIncident(id)(f) && f['AckedState.Id'] === true);
    expect(await session.confirmCondition(acked.ConditionId as NodeId, acked.EventId as Buffer, 'bearing replaced')).toEqual(StatusCodes.Good);
    expect((await store.get(id))?.closed).toMatchObject({ how: 'resolved', by: 'operator (OPC UA)', note: 'bearing replaced' });
    const closed = await feed.next((f) => ofIncident(id)(f) && f['ConfirmedState.Id'] === true);
    expect(closed.Retain).toBe(false);
    await close();
  }, 240_000);

  it('TimedShelve from the client shelves for the given time; longer than opcua.maxShelveHours is refused', async () => {
    const { session, close } = await connect({ userName: 'operator', password: env.WS_OPCUA_OPERATOR });
    const feed = await events(session);
    const id = 'PS2-P5/gearbox@LAB-0400';
    await judge([step('LAB-0400', '2026-05-02T08:00:00Z', 'alarm', 'PS2-P5')], new Date(), 'PS2-P5');
    const raised = await feed.next((f) => ofIncident(id)(f) && f['ActiveState.Id'] === true);
    const shelvingId = await shelvingStateNode(session, raised.ConditionId as NodeId);
    const timedShelve = (ms: number) => session.call({ objectId: shelvingId, methodId: 'i=2949' /* ShelvedStateMachineType.TimedShelve */, inputArguments: [{ dataType: DataType.Double, value: ms }] as never });
    // The default opcua.maxShelveHours is 168.
    expect((await timedShelve(169 * 3_600_000)).statusCode).toEqual(StatusCodes.BadShelvingTimeOutOfRange);
    expect((await store.get(id))?.shelved).toBeNull();
    expect((await timedShelve(2 * 3_600_000)).statusCode).toEqual(StatusCodes.Good);
    const shelved = (await store.get(id))?.shelved;
    expect(shelved).toMatchObject({ by: 'operator (OPC UA)', reason: 'timed shelving from OPC UA for 2 h' });
    expect(Date.parse(shelved!.until) - Date.parse(shelved!.at)).toBe(2 * 3_600_000);
    await feed.next((f) => ofIncident(id)(f) && shelvingStateOf(f) === 'TimedShelved');
    expect((await timedShelve(3_600_000)).statusCode).toEqual(StatusCodes.BadConditionAlreadyShelved);
    await close();
  }, 240_000);

  it('Sign & Encrypt (Basic256Sha256): an untrusted client certificate is refused until it is trusted', async () => {
    const pki = join(dir, 'client-pki');
    const secure = { mode: MessageSecurityMode.SignAndEncrypt, policy: SecurityPolicy.Basic256Sha256, pki };
    await expect(connect({ userName: 'operator', password: env.WS_OPCUA_OPERATOR }, secure)).rejects.toThrow();
    const clientCertificates = new OPCUACertificateManager({ rootFolder: pki });
    await clientCertificates.initialize();
    const { readCertificate } = await import('node-opcua-crypto');
    await opcua.certificates!.trustCertificate(readCertificate(join(pki, 'own', 'certs', 'client_certificate.pem')));
    const { session, close } = await connect({ userName: 'operator', password: env.WS_OPCUA_OPERATOR }, secure);
    const name = await session.read({ nodeId: 'ns=1;s=Wearshift', attributeId: AttributeIds.BrowseName });
    expect(name.value.value.name).toBe('Wearshift');
    await close();
  }, 240_000);
});
