/**
 * The OPC UA alarm server's bounds, against real OPC UA clients (node-opcua-client) over opc.tcp on 127.0.0.1 and a
 * real Redis: many subscribers on one node, monitored items and sessions beyond the configured limits, sessions per
 * user and for responders, the session timeout, the user tokens offered and accepted, the advertised endpoint,
 * connections that hold no session, shelving within incidents.maxShelveHours, the refresh that pages through every open incident, the tree built from
 * the components on record, and conditions that leave nothing behind when they close.
 */
import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import {
  AttributeIds,
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
  VariableIds,
  constructEventFilter,
  type AddressSpace,
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
import { incidentEvent } from '../../src/pipeline/liveEvent.ts';
import { OpcuaAlarmServer, type OpcuaAlarmServerOptions } from '../../src/opcua/alarmServer.ts';
import { RedisIncidents } from '../../src/redis/redisIncidents.ts';
import { bridgeLiveEvents, livePublisher } from '../../src/runtime/liveBridge.ts';
import { createLogger } from '../../src/telemetry/logger.ts';
import { waitFor } from '../helpers/processes.ts';
import { freePort, startRedisServer, type RedisServer } from '../helpers/redisServer.ts';

const PREFIX = '{opcuabounds}';
const logger = createLogger({ level: 'silent' });
const env = { WS_OPCUA_OPERATOR: 'op-secret-2', WS_OPCUA_WATCHER: 'watch-secret-2', WS_OPCUA_HISTORIAN: 'hist-secret-2' };
const USERS = [
  { userName: 'operator', passwordEnv: 'WS_OPCUA_OPERATOR', role: 'responder' },
  { userName: 'watcher', passwordEnv: 'WS_OPCUA_WATCHER', role: 'viewer' },
  { userName: 'historian', passwordEnv: 'WS_OPCUA_HISTORIAN', role: 'viewer' },
] as const;
const operator = { userName: 'operator', password: env.WS_OPCUA_OPERATOR };
const watcher = { userName: 'watcher', password: env.WS_OPCUA_WATCHER };
const historian = { userName: 'historian', password: env.WS_OPCUA_HISTORIAN };
/** incidents.maxShelveHours of this site, shorter than opcua.maxShelveHours (168 by default). */
const INCIDENT_MAX_SHELVE_HOURS = 48;
const HOUR_MS = 3_600_000;
/** Far above anything a busy machine needs; the tests wait for events, never for time. */
const EVENT_WAIT_MS = 120_000;

let redis: RedisServer;
let dir: string;
let store: RedisIncidents;
let hub: ReturnType<typeof createEventHub>;
let announce: ReturnType<typeof livePublisher>;
const servers: OpcuaAlarmServer[] = [];
const clients: OPCUAClient[] = [];

function step(sampleId: string, severity: 'watch' | 'caution' | 'alarm' | null, unit: string, sampledAt = '2026-04-01T08:00:00Z'): Step {
  return {
    sampleId,
    sampledAt,
    findings:
      severity === null
        ? []
        : [{ unit, component: 'gearbox', group: 'gearboxes', measurand: 'Fe', rule: 'cusum', disposition: 'incident', severity, value: 7, threshold: 5, basis: 'cusum', direction: 'up', sampleId, sampledAt, explanation: 'Fe wear rate shifted up' }],
  };
}

/**
 * Stores a step as the worker does and announces the change on the live channel; returns the incident's id (a new
 * one, or a closed one the finding reopened).
 */
async function openIncident(unit: string, sampleId: string, severity: 'watch' | 'caution' | 'alarm', target = store, publish = announce, sampledAt?: string): Promise<string> {
  const r = await target.applySteps({ unit, component: 'gearbox' }, [step(sampleId, severity, unit, sampledAt)], { group: 'gearboxes', now: new Date(), quietBefore: new Date(0) });
  const { incidentChanges } = await import('../../src/pipeline/incidentChanges.ts');
  const changes = incidentChanges(r.before, r.state);
  for (const change of changes) publish(incidentEvent(change));
  expect(changes.length).toBeGreaterThan(0);
  return changes[0]!.incidentId;
}

/** Closes an incident from the API side (acknowledged, then resolved), announced as the API announces it. */
async function closeIncident(id: string, target = store, publish = announce): Promise<void> {
  const api = announcingActions(target, publish);
  await api.applyAction({ kind: 'acknowledge', incidentId: id, by: 'R. Tanaka', now: new Date() });
  await api.applyAction({ kind: 'resolve', incidentId: id, by: 'R. Tanaka', note: 'oil changed', now: new Date() });
}

async function startServer(config: Record<string, unknown>, extra: Partial<OpcuaAlarmServerOptions> = {}): Promise<{ server: OpcuaAlarmServer; url: string; port: number }> {
  const port = await freePort();
  const server = new OpcuaAlarmServer({
    config: OpcuaConfigSchema.parse({ port, host: '127.0.0.1', securityModes: ['None'], pkiDir: join(dir, `pki-${port}`), users: USERS, refreshSeconds: 3600, ...config }),
    store: announcingActions(store, announce),
    subscribe: (l) => hub.subscribe((e) => l(e)),
    logger,
    env,
    incidentMaxShelveHours: INCIDENT_MAX_SHELVE_HOURS,
    ...extra,
  });
  servers.push(server);
  return { server, url: await server.start(), port };
}

function newClient(options: { endpointMustExist?: boolean; requestedSessionTimeout?: number; pki?: string } = {}): OPCUAClient {
  const client = OPCUAClient.create({
    endpointMustExist: options.endpointMustExist ?? false,
    securityMode: MessageSecurityMode.None,
    securityPolicy: SecurityPolicy.None,
    connectionStrategy: { maxRetry: 0, initialDelay: 100 },
    requestedSessionTimeout: options.requestedSessionTimeout ?? 120_000,
    ...(options.pki !== undefined && { clientCertificateManager: new OPCUACertificateManager({ rootFolder: options.pki, automaticallyAcceptUnknownCertificate: true }) }),
  });
  clients.push(client);
  return client;
}

async function session(url: string, user?: { userName: string; password: string }, options: { requestedSessionTimeout?: number } = {}): Promise<{ client: OPCUAClient; session: ClientSession }> {
  const client = newClient(options);
  await client.connect(url);
  try {
    return { client, session: await client.createSession(user === undefined ? { type: UserTokenType.Anonymous } : { type: UserTokenType.UserName, ...user }) };
  } catch (e) {
    await client.disconnect();
    throw e;
  }
}

/** Whether the server has closed the client's connection (or refused it), as the client sees it. */
function closing(client: OPCUAClient): { readonly closed: Promise<void>; isClosed(): boolean } {
  let done = false;
  let settle: () => void = () => undefined;
  const closed = new Promise<void>((resolve) => {
    settle = () => {
      done = true;
      resolve();
    };
  });
  client.once('connection_lost', () => settle());
  client.once('close', () => settle());
  return { closed, isClosed: () => done };
}

/** A client that opens a secure channel and no session; refused or not, it says when the channel is gone. */
async function channelOnly(url: string): Promise<{ client: OPCUAClient } & ReturnType<typeof closing>> {
  const client = newClient();
  const watch = closing(client);
  let refused = false;
  await client.connect(url).catch(() => {
    refused = true;
  });
  return { client, closed: refused ? Promise.resolve() : watch.closed, isClosed: () => refused || watch.isClosed() };
}

/** Settles within EVENT_WAIT_MS or fails naming `what`. */
async function within<T>(what: string, promise: Promise<T>): Promise<T> {
  let timer: NodeJS.Timeout | undefined;
  try {
    return await Promise.race([promise, new Promise<never>((_, reject) => (timer = setTimeout(() => reject(new Error(`timed out waiting for ${what}`)), EVENT_WAIT_MS)))]);
  } finally {
    clearTimeout(timer);
  }
}

/** The status a refused session was answered with (the client's error names it). */
async function refusal(url: string, user?: { userName: string; password: string }): Promise<string> {
  const attempt = await session(url, user).then(
    () => 'accepted',
    (e: Error) => e.message,
  );
  return attempt;
}

/** An event subscription on `nodeId`; `next(pred)` resolves with the first event (seen or coming) that matches. */
async function eventFeed(s: ClientSession, nodeIds: string[]) {
  const fields = ['EventId', 'Message', '1:IncidentId', 'Retain'];
  const subscription = ClientSubscription.create(s, { requestedPublishingInterval: 50, requestedMaxKeepAliveCount: 20, publishingEnabled: true, maxNotificationsPerPublish: 100 });
  await new Promise<void>((resolve) => subscription.once('started', () => resolve()));
  const seen: Array<{ node: string; id: unknown }> = [];
  const waiters: Array<() => void> = [];
  for (const nodeId of nodeIds) {
    const item = ClientMonitoredItem.create(subscription, { nodeId, attributeId: AttributeIds.EventNotifier }, { samplingInterval: 0, queueSize: 1000, discardOldest: false, filter: constructEventFilter(fields) }, TimestampsToReturn.Both);
    item.on('changed', (values: Variant[]) => {
      seen.push({ node: nodeId, id: values[2]?.value });
      for (const w of waiters.splice(0)) w();
    });
    await new Promise<void>((resolve) => item.once('initialized', () => resolve()));
  }
  return {
    async sawOnEvery(id: string): Promise<void> {
      const done = () => nodeIds.every((n) => seen.some((e) => e.node === n && e.id === id));
      const deadline = Date.now() + EVENT_WAIT_MS;
      while (!done()) {
        if (Date.now() > deadline) throw new Error(`no event for ${id} on every node; saw ${JSON.stringify(seen)}`);
        await new Promise<void>((resolve) => {
          waiters.push(resolve);
          setTimeout(resolve, 1000);
        });
      }
    },
  };
}

/** Every listener on every node of the address space, and the number of nodes. */
function listenersAndNodes(addressSpace: AddressSpace): { listeners: number; nodes: number } {
  let listeners = 0;
  let nodes = 0;
  for (const ns of addressSpace.getNamespaceArray()) {
    for (const node of ns.nodeIterator()) {
      nodes += 1;
      const emitter = node as unknown as NodeJS.EventEmitter;
      for (const name of emitter.eventNames()) listeners += emitter.listenerCount(name);
    }
  }
  return { listeners, nodes };
}

beforeAll(async () => {
  dir = mkdtempSync(join(tmpdir(), 'wearshift-opcua-bounds-'));
  redis = await startRedisServer();
  store = new RedisIncidents(redis.client(), { rules: incidentRules(ConfigSchema.parse({ incidents: { maxShelveHours: INCIDENT_MAX_SHELVE_HOURS } })), prefix: PREFIX });
  hub = createEventHub();
  await bridgeLiveEvents(redis.client(), PREFIX, hub, logger);
  announce = livePublisher(redis.client(), PREFIX, logger);
}, 120_000);

afterAll(async () => {
  for (const c of clients) await c.disconnect().catch(() => undefined);
  for (const s of servers) await s.stop();
  await redis?.dispose();
  rmSync(dir, { recursive: true, force: true });
});

describe('OPC UA server bounds', () => {
  it('twelve clients watching the events of the Server object and of Objects/Wearshift all get every alarm; monitored items beyond the limit are refused one by one and the server serves on', async () => {
    const { server, url } = await startServer({ anonymous: 'viewer', limits: { maxSessions: 20, responderSessions: 2, maxSessionsPerUser: 16, maxMonitoredItemsPerSubscription: 4 } });
    const feeds = [];
    // Node warns from the 11th listener on one emitter; the warning used to take the process down.
    for (let i = 0; i < 12; i++) feeds.push(await eventFeed((await session(url)).session, ['i=2253', 'ns=1;s=Wearshift']));
    const id = await openIncident('CROWD-1', 'LAB-C1', 'alarm');
    for (const feed of feeds) await feed.sawOnEvery(id);

    const { session: one } = await session(url);
    // The services themselves (this client publishes nothing for the subscription), five items where four are allowed.
    const raw = one as unknown as {
      createSubscription(request: object): Promise<{ subscriptionId: number }>;
      createMonitoredItems(request: object): Promise<{ results: Array<{ statusCode: { name: string } }> }>;
    };
    const subscription = await raw.createSubscription({ requestedPublishingInterval: 100, requestedLifetimeCount: 100, requestedMaxKeepAliveCount: 10, maxNotificationsPerPublish: 10, publishingEnabled: false, priority: 1 });
    const items = Array.from({ length: 5 }, () => ({ itemToMonitor: { nodeId: 'i=2253', attributeId: AttributeIds.EventNotifier }, monitoringMode: 2, requestedParameters: { samplingInterval: 0, queueSize: 10, discardOldest: true, filter: constructEventFilter(['EventId']) } }));
    const created = await raw.createMonitoredItems({ subscriptionId: subscription.subscriptionId, timestampsToReturn: TimestampsToReturn.Both, itemsToCreate: items });
    expect(created.results.map((r) => r.statusCode.name)).toEqual(['Good', 'Good', 'Good', 'Good', 'BadTooManyMonitoredItems']);
    const capabilities = await one.read({ nodeId: `i=${VariableIds.Server_ServerCapabilities_MaxMonitoredItemsPerSubscription}`, attributeId: AttributeIds.Value });
    expect(capabilities.value.value).toBe(4);

    // Still serving: a new client reads the server's state, and the next alarm reaches the twelve.
    const { session: later } = await session(url);
    expect((await later.read({ nodeId: `i=${VariableIds.Server_ServerStatus_State}`, attributeId: AttributeIds.Value })).value.value).toBe(0 /* Running */);
    const next = await openIncident('CROWD-2', 'LAB-C2', 'caution');
    for (const feed of feeds) await feed.sawOnEvery(next);
    expect(server.conditionOf(next)).toBeDefined();
  }, 300_000);

  it('sessions per user and for responders: a viewer cannot take every session, responders keep theirs; a closed session frees its place; the session timeout is capped', async () => {
    const { url } = await startServer({ anonymous: 'viewer', advertisedHost: 'localhost', limits: { maxSessions: 6, responderSessions: 2, maxSessionsPerUser: 3, sessionTimeoutSeconds: 60 } });
    const held = [];
    for (let i = 0; i < 3; i++) held.push(await session(url, watcher, { requestedSessionTimeout: HOUR_MS }));
    // Asked for an hour, granted opcua.limits.sessionTimeoutSeconds.
    expect(held[0]!.session.timeout).toBe(60_000);
    expect(await refusal(url, watcher)).toContain('BadTooManySessions');
    await session(url);
    // Viewers and anonymous sessions together hold maxSessions - responderSessions = 4.
    expect(await refusal(url, historian)).toContain('BadTooManySessions');
    expect(await refusal(url)).toContain('BadTooManySessions');
    const responders = [await session(url, operator), await session(url, operator)];
    expect(responders).toHaveLength(2);
    await held[0]!.session.close();
    await held[0]!.client.disconnect();
    await waitFor('a free place for a viewer', async () => (await refusal(url, historian)) === 'accepted', EVENT_WAIT_MS, 200);
  }, 300_000);

  it('connections without a session: one address holds at most limits.pendingChannelsPerAddress, a further one is closed at once; a closed one frees its place', async () => {
    const { url } = await startServer({ anonymous: 'viewer', limits: { idleChannelSeconds: 600, pendingChannelsPerAddress: 2 } });
    const first = await channelOnly(url);
    const second = await channelOnly(url);
    const third = await channelOnly(url);
    await within('the third connection without a session to be closed', third.closed);
    // The idle time is ten minutes: the two first are still open.
    expect([first.isClosed(), second.isClosed()]).toEqual([false, false]);
    await first.client.disconnect();
    // A client from the same address that activates a session gets in, and keeps its connection.
    await waitFor('a place for a new connection', async () => (await refusal(url)) === 'accepted', EVENT_WAIT_MS, 200);
  }, 300_000);

  it('a connection left without a session for limits.idleChannelSeconds is closed; a session keeps its connection, and closing the session starts the clock again', async () => {
    // The default idle time: the session client below activates its session well within it, even on a busy machine.
    const { url } = await startServer({ anonymous: 'viewer', limits: { idleChannelSeconds: 10 } });
    const held = await session(url);
    const heldConnection = closing(held.client);
    const idle = await channelOnly(url);
    await within('the connection without a session to be closed', idle.closed);
    // The session's connection outlived the idle time and still serves.
    expect(heldConnection.isClosed()).toBe(false);
    expect((await held.session.read({ nodeId: `i=${VariableIds.Server_ServerStatus_State}`, attributeId: AttributeIds.Value })).value.value).toBe(0 /* Running */);
    await held.session.close();
    await within('the connection whose session closed to be closed', heldConnection.closed);
  }, 300_000);

  it('only user-name tokens are offered (and anonymous ones with anonymous: viewer); an X509 user token with a self-made certificate is refused', async () => {
    const { url, port } = await startServer({ anonymous: 'none' });
    const client = newClient({ pki: join(dir, 'x509-client-pki') });
    await client.connect(url);
    const endpoints = await client.getEndpoints();
    expect(new Set(endpoints.flatMap((e) => (e.userIdentityTokens ?? []).map((t) => UserTokenType[t.tokenType])))).toEqual(new Set(['UserName']));
    // The endpoint names the configured host (127.0.0.1), so a client that insists on an advertised endpoint connects.
    expect(new Set(endpoints.map((e) => e.endpointUrl))).toEqual(new Set([`opc.tcp://127.0.0.1:${port}/wearshift`]));

    // A client that sends a certificate token anyway, under the policy the library used to offer.
    const { readFileSync } = await import('node:fs');
    const { convertPEMtoDER } = await import('node-opcua-crypto');
    const hostile = client as unknown as { _serverEndpoints: Array<{ userIdentityTokens: unknown[] | null }>; certificateFile: string; privateKeyFile: string };
    for (const e of hostile._serverEndpoints) e.userIdentityTokens = [...(e.userIdentityTokens ?? []), { policyId: 'certificate_basic256Sha256', tokenType: UserTokenType.Certificate, securityPolicyUri: SecurityPolicy.Basic256Sha256 }];
    const x509 = await client
      .createSession({ type: UserTokenType.Certificate, certificateData: convertPEMtoDER(readFileSync(hostile.certificateFile, 'utf8')), privateKey: readFileSync(hostile.privateKeyFile, 'utf8') } as never)
      .then(
        () => 'accepted',
        (e: Error) => e.message,
      );
    expect(x509).toMatch(/BadIdentityToken/);
    await client.disconnect();

    // A default client (the endpoint it connects to must be one the server advertises) gets a session.
    const strict = newClient({ endpointMustExist: true });
    await strict.connect(url);
    const s = await strict.createSession({ type: UserTokenType.UserName, ...operator });
    expect((await s.read({ nodeId: 'ns=1;s=Wearshift', attributeId: AttributeIds.BrowseName })).value.value.name).toBe('Wearshift');
    await strict.disconnect();

    const { port: viewerPort } = await startServer({ anonymous: 'viewer', advertisedHost: 'localhost' });
    const probe = newClient();
    await probe.connect(`opc.tcp://127.0.0.1:${viewerPort}/wearshift`);
    const offered = await probe.getEndpoints();
    expect(new Set(offered.flatMap((e) => (e.userIdentityTokens ?? []).map((t) => UserTokenType[t.tokenType])))).toEqual(new Set(['UserName', 'Anonymous']));
    expect(new Set(offered.map((e) => e.endpointUrl))).toEqual(new Set([`opc.tcp://localhost:${viewerPort}/wearshift`]));
    await probe.disconnect();
  }, 300_000);

  it('MaxTimeShelved is the shorter of opcua.maxShelveHours and incidents.maxShelveHours; a TimedShelve beyond it is BadShelvingTimeOutOfRange, up to it Good', async () => {
    const { server, url } = await startServer({ anonymous: 'none' });
    const id = await openIncident('SHELF-1', 'LAB-S1', 'alarm');
    await waitFor(`condition ${id}`, () => server.conditionOf(id) !== undefined, EVENT_WAIT_MS, 50);
    const { session: s } = await session(url, operator);
    const conditionId = `ns=1;s=incident:${id}`;
    const browsed = await s.browse({ nodeId: conditionId, browseDirection: 0, resultMask: 63 });
    const shelvingId = browsed.references!.find((r) => r.browseName.name === 'ShelvingState')!.nodeId as NodeId;
    const inShelving = await s.browse({ nodeId: shelvingId, browseDirection: 0, resultMask: 63 });
    const maxTime = browsed.references!.find((r) => r.browseName.name === 'MaxTimeShelved') ?? inShelving.references!.find((r) => r.browseName.name === 'MaxTimeShelved');
    expect((await s.read({ nodeId: maxTime!.nodeId, attributeId: AttributeIds.Value })).value.value).toBe(INCIDENT_MAX_SHELVE_HOURS * HOUR_MS);
    const timedShelve = (ms: number) => s.call({ objectId: shelvingId, methodId: 'i=2949' /* TimedShelve */, inputArguments: [{ dataType: DataType.Double, value: ms }] as never });
    expect((await timedShelve((INCIDENT_MAX_SHELVE_HOURS + 1) * HOUR_MS)).statusCode).toEqual(StatusCodes.BadShelvingTimeOutOfRange);
    expect((await store.get(id))?.shelved).toBeNull();
    expect((await timedShelve(INCIDENT_MAX_SHELVE_HOURS * HOUR_MS)).statusCode).toEqual(StatusCodes.Good);
    const shelved = (await store.get(id))!.shelved!;
    expect(Date.parse(shelved.until) - Date.parse(shelved.at)).toBe(INCIDENT_MAX_SHELVE_HOURS * HOUR_MS);
  }, 300_000);

  it('twelve incidents opened and closed on one component leave no listener and no node behind', async () => {
    const { server } = await startServer({ anonymous: 'none' });
    const cycle = async (n: number) => {
      const id = await openIncident('CYCLE-1', `LAB-Y${n}`, 'caution', store, announce, new Date(Date.UTC(2026, 3, n)).toISOString());
      await waitFor(`condition ${id} shown`, () => server.conditionOf(id) !== undefined, EVENT_WAIT_MS, 20);
      await closeIncident(id);
      await waitFor(`condition ${id} removed`, () => server.conditionOf(id) === undefined, EVENT_WAIT_MS, 20);
    };
    await cycle(1);
    await cycle(2);
    const before = listenersAndNodes(server.addressSpace!);
    for (let n = 3; n <= 12; n++) await cycle(n);
    expect(listenersAndNodes(server.addressSpace!)).toEqual(before);
    const count = server.addressSpace!.findNode('ns=1;s=component:CYCLE-1/gearbox/OpenIncidents') as unknown as { readValue(): { value: { value: unknown } } };
    expect(count.readValue().value.value).toBe(0);
  }, 300_000);

  it('the refresh pages through every open incident, shows them up to limits.maxConditions by severity, and the rest once places are free; the tree comes from the components on record up to limits.maxComponents', async () => {
    const prefix = '{opcuapaged}';
    const own = new RedisIncidents(redis.client(), { rules: incidentRules(ConfigSchema.parse({})), prefix });
    const quiet = () => undefined;
    const ids: string[] = [];
    for (let i = 1; i <= 10; i++) ids.push(await openIncident(`PAGED-W${String(i).padStart(2, '0')}`, `LAB-W${i}`, 'watch', own, quiet));
    const alarms: string[] = [];
    for (let i = 1; i <= 5; i++) alarms.push(await openIncident(`PAGED-A${i}`, `LAB-A${i}`, 'alarm', own, quiet));
    const onRecord = Array.from({ length: 30 }, (_, i) => ({ unit: `REC-${Math.floor(i / 3)}`, component: `part ${i % 3}` }));
    const lines: string[] = [];
    const { server, url } = await startServer(
      { anonymous: 'none', refreshSeconds: 1, limits: { maxConditions: 12, maxComponents: 20 } },
      {
        store: announcingActions(own, quiet),
        // No live events: only the refresh passes show what is open.
        subscribe: () => () => undefined,
        refreshPage: 4,
        components: async (limit) => onRecord.slice(0, limit),
        logger: createLogger({ level: 'warn', destination: { write: (line: string) => void lines.push(line) } as never }),
      },
    );
    const shown = () => [...ids, ...alarms].filter((id) => server.conditionOf(id) !== undefined);
    await waitFor('twelve conditions', () => shown().length === 12, EVENT_WAIT_MS, 50);
    for (const id of alarms) expect(server.conditionOf(id), id).toBeDefined();
    await waitFor('the log line on the incidents left out', () => lines.some((l) => l.includes('maxConditions') && l.includes('"notShown":3')), EVENT_WAIT_MS, 50);

    const { session: s } = await session(url, watcher);
    const units = await s.browse({ nodeId: 'ns=1;s=Wearshift', browseDirection: 0, resultMask: 63 });
    const names = [...new Set((units.references ?? []).map((r) => String(r.browseName.name)))];
    // 20 components of the record (7 units), and the units of the conditions shown.
    expect(names.filter((n) => n.startsWith('REC-'))).toHaveLength(7);
    expect((await s.read({ nodeId: 'ns=1;s=component:REC-6/part 1/OpenIncidents', attributeId: AttributeIds.Value })).value.value).toBe(0);
    expect((await s.read({ nodeId: 'ns=1;s=component:REC-9/part 2/OpenIncidents', attributeId: AttributeIds.Value })).statusCode).toEqual(StatusCodes.BadNodeIdUnknown);

    for (const id of alarms.slice(0, 4)) await closeIncident(id, own, quiet);
    await waitFor('the eleven still open, all shown', () => shown().length === 11 && alarms.slice(0, 4).every((id) => server.conditionOf(id) === undefined), EVENT_WAIT_MS, 50);
  }, 300_000);
});
