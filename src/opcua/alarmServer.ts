/**
 * The OPC UA Alarms & Conditions server (IEC 62541-9) for control rooms: every unit and component on record in the
 * address space under Objects/Wearshift, every open incident an alarm condition on its component, with the
 * evidence as event fields. Acknowledge, Confirm, AddComment and the Shelve methods called by a client act on
 * the incident through the same incident store as the HTTP API (role-checked), and every incident change made
 * anywhere (worker, API, board, e-mail link) is shown at once from the live events. ConditionRefresh is
 * answered by the library from the retained conditions. Sessions, subscriptions, monitored items, components and
 * conditions are bounded by `opcua.limits` (see boundedServer.ts).
 */
import { createHash } from 'node:crypto';
import { join } from 'node:path';
import {
  DataType,
  MessageSecurityMode,
  NodeId,
  OPCUACertificateManager,
  RegisterServerMethod,
  SecurityPolicy,
  StatusCodes,
  Variant,
  VariantArrayType,
  type AddressSpace,
  type CallMethodResultOptions,
  type ISessionContext,
  type Namespace,
  type StatusCode,
  type UAAlarmConditionEx,
  type UAMethod,
  type UAObject,
  type UAObjectType,
  type UAVariable,
} from 'node-opcua';
import type { OpcuaConfig } from '../domain/opcuaConfig.ts';
import { InputError } from '../domain/errors.ts';
import type { IncidentAction } from '../incidents/applyAction.ts';
import { IncidentConflictError, IncidentNotFoundError } from '../incidents/errors.ts';
import type { ListPosition } from '../incidents/listPage.ts';
import { summarize, type Incident, type IncidentSummary } from '../incidents/model.ts';
import type { IncidentRoutesStore } from '../http/incidentRoutes.ts';
import type { LiveEvent } from '../pipeline/liveEvent.ts';
import type { Logger } from '../telemetry/logger.ts';
import { BoundedOpcuaServer, liftNodeListenerLimit } from './boundedServer.ts';
import { conditionView, ONE_SHOT_REASON, type ConditionView } from './conditionView.ts';
import { OpcuaUsers, type OpcuaRole } from './opcuaUsers.ts';

export interface OpcuaAlarmServerOptions {
  readonly config: OpcuaConfig;
  /** Overrides `config.port` (`--opcua-port`). */
  readonly port?: number;
  /** The incident store, announcing actions to the live feed (as the HTTP API uses it). */
  readonly store: IncidentRoutesStore;
  /** Subscribes to live events; returns the function that ends the subscription. */
  readonly subscribe?: (listener: (event: LiveEvent) => void) => () => void;
  readonly logger: Logger;
  readonly env?: NodeJS.ProcessEnv;
  /** Default: the system clock. */
  readonly now?: () => Date;
  /**
   * `incidents.maxShelveHours`, which the store holds every shelving to: MaxTimeShelved and the one-shot shelving
   * are never longer. Default: no limit beyond `opcua.maxShelveHours` and `opcua.oneShotShelveHours`.
   */
  readonly incidentMaxShelveHours?: number;
  /**
   * The components on record (unit and component), at most `limit`: the tree under Objects/Wearshift is built from
   * them at start, so that a component's node id stays valid across restarts. Without it, a component appears
   * with its first result or open incident after the start.
   */
  readonly components?: (limit: number) => Promise<ReadonlyArray<{ readonly unit: string; readonly component: string }>>;
  /** Open incidents read per page of a refresh. Default 200. */
  readonly refreshPage?: number;
}

/** Event fields of wearshift's alarm type beyond AlarmConditionType's. */
export const INCIDENT_FIELDS = ['IncidentId', 'Unit', 'Component', 'Measurand', 'Evidence'] as const;
export const ALARM_TYPE_NAME = 'WearshiftIncidentAlarmType';

const MODES: Record<OpcuaConfig['securityModes'][number], MessageSecurityMode> = {
  None: MessageSecurityMode.None,
  Sign: MessageSecurityMode.Sign,
  SignAndEncrypt: MessageSecurityMode.SignAndEncrypt,
};
const POLICIES: Record<OpcuaConfig['securityPolicies'][number], SecurityPolicy> = {
  None: SecurityPolicy.None,
  Basic256Sha256: SecurityPolicy.Basic256Sha256,
  Aes128_Sha256_RsaOaep: SecurityPolicy.Aes128_Sha256_RsaOaep,
  Aes256_Sha256_RsaPss: SecurityPolicy.Aes256_Sha256_RsaPss,
};

interface ComponentNode {
  readonly node: UAObject;
  readonly openCount: UAVariable;
  /** Conditions shown on it. */
  open: number;
}

interface Shown {
  readonly cond: UAAlarmConditionEx;
  readonly component: ComponentNode;
  /** The state last shown. */
  signature: string;
  /** Digest of the incident's summary last shown: a refresh reads in full only incidents whose summary changed. */
  summary: string;
  /** Event ids raised for it (a client may answer any recent one). */
  eventIds: string[];
  /** The refresh pass that last found it open. */
  pass: number;
}

const REFRESH_PAGE = 200;
/** Components of the tree made per step of the chain at start. */
const TREE_STEP = 200;
/** How long start() waits for the first reading of the open incidents before it returns all the same. */
const FIRST_REFRESH_WAIT_MS = 5000;
const HOUR_MS = 3_600_000;
/** Listening on every interface: the endpoint URL then names the machine, unless `advertisedHost` says otherwise. */
const WILDCARD_HOSTS = new Set(['0.0.0.0', '::', '[::]']);

type ShelvingMachine = UAObject & {
  getCurrentState(): string | null;
  setState(name: string): void;
  _shelvedTime?: Date;
  _duration?: number;
  _unshelvedTime?: Date;
};

export class OpcuaAlarmServer {
  private readonly config: OpcuaConfig;
  private readonly users: OpcuaUsers;
  private readonly now: () => Date;
  private readonly maxShelveMs: number;
  private readonly oneShotHours: number;
  private server: BoundedOpcuaServer | undefined;
  private certificateStore: OPCUACertificateManager | undefined;
  private namespace: Namespace | undefined;
  private alarmType: UAObjectType | undefined;
  private root: UAObject | undefined;
  private readonly units = new Map<string, UAObject>();
  private readonly components = new Map<string, ComponentNode>();
  /** Every condition shown, by incident id. */
  private readonly shown = new Map<string, Shown>();
  /** Every change to the address space runs in this chain, one at a time. */
  private chain: Promise<unknown> = Promise.resolve();
  private timer: NodeJS.Timeout | undefined;
  private unsubscribe: (() => void) | undefined;
  /** Live events not applied yet, coalesced: one step of the chain applies all that came meanwhile. */
  private readonly pendingIncidents = new Set<string>();
  private readonly pendingComponents = new Map<string, { unit: string; component: string }>();
  private draining = false;
  private refreshing: Promise<void> | undefined;
  private pass = 0;
  private treeLoaded = false;
  private stopped = false;

  constructor(private readonly options: OpcuaAlarmServerOptions) {
    this.config = options.config;
    this.users = new OpcuaUsers(options.config, options.env ?? process.env);
    this.now = options.now ?? (() => new Date());
    const incidentMax = options.incidentMaxShelveHours ?? Infinity;
    this.maxShelveMs = Math.min(this.config.maxShelveHours, incidentMax) * HOUR_MS;
    this.oneShotHours = Math.min(this.config.oneShotShelveHours, incidentMax);
  }

  /**
   * Starts listening; resolves with the endpoint URL. The open incidents are read before it returns when Redis
   * answers soon; when it does not (away or slow at start), the server listens all the same and the refresh every
   * `refreshSeconds` shows them once it answers.
   */
  async start(): Promise<string> {
    const c = this.config;
    const certificates = new OPCUACertificateManager({ rootFolder: c.pkiDir, automaticallyAcceptUnknownCertificate: c.trustUnknownClients });
    await certificates.initialize();
    this.certificateStore = certificates;
    // X509 user tokens are neither offered nor accepted; this store (which trusts nothing) only keeps the library from
    // making its own, which accepts every certificate, in the home directory.
    const userCertificates = new OPCUACertificateManager({ rootFolder: join(c.pkiDir, 'user-tokens'), automaticallyAcceptUnknownCertificate: false });
    const policies = c.securityPolicies.map((p) => POLICIES[p]);
    if (c.securityModes.includes('None') && !policies.includes(SecurityPolicy.None)) policies.unshift(SecurityPolicy.None);
    const advertised = c.advertisedHost ?? (WILDCARD_HOSTS.has(c.host) ? undefined : c.host);
    const logger = this.options.logger;
    const server = new BoundedOpcuaServer(
      {
        port: this.options.port ?? c.port ?? 4840,
        host: c.host,
        // The alternate name puts the advertised host into the self-signed certificate made on first start.
        ...(advertised !== undefined && { hostname: advertised, alternateHostname: [advertised] }),
        resourcePath: c.resourcePath,
        securityModes: c.securityModes.map((m) => MODES[m]),
        securityPolicies: policies,
        userManager: { isValidUser: (userName: string, password: string) => this.users.isValidUser(userName, password) },
        serverCertificateManager: certificates,
        userCertificateManager: userCertificates,
        registerServerMethod: RegisterServerMethod.HIDDEN,
        buildInfo: { productName: 'wearshift', productUri: 'urn:wearshift', manufacturerName: 'wearshift' },
      },
      {
        limits: c.limits,
        anonymous: c.anonymous !== 'none',
        roleOf: (userName) => this.users.roleOf(userName),
        onRefused: (refusal, userName) => logger.warn({ refusal, user: userName ?? '(anonymous)' }, 'OPC UA session refused: opcua.limits reached'),
        onChannelClosed: (why, address) => logger.warn({ why, address }, 'OPC UA connection closed: no session on it (opcua.limits.idleChannelSeconds, pendingChannelsPerAddress)'),
      },
    );
    this.server = server;
    await server.initialize();
    liftNodeListenerLimit(server.engine.addressSpace!);
    this.buildAddressSpace();
    await server.start();
    this.unsubscribe = this.options.subscribe?.((event) => this.announce(event));
    await Promise.race([this.refreshAll(), new Promise((resolve) => setTimeout(resolve, FIRST_REFRESH_WAIT_MS).unref())]);
    this.timer = setInterval(() => void this.refreshAll(), c.refreshSeconds * 1000);
    this.timer.unref();
    return server.getEndpointUrl();
  }

  async stop(): Promise<void> {
    this.stopped = true;
    if (this.timer !== undefined) clearInterval(this.timer);
    this.unsubscribe?.();
    await this.refreshing;
    await this.chain.catch(() => undefined);
    this.server?.stopGuard();
    await this.server?.shutdown(0);
    this.server = undefined;
  }

  /** The server's certificate store (trusted and rejected client certificates). */
  get certificates(): OPCUACertificateManager | undefined {
    return this.certificateStore;
  }

  get endpointUrl(): string | undefined {
    return this.server?.getEndpointUrl();
  }

  /** The condition node of an incident, while it is shown. */
  conditionOf(incidentId: string): UAAlarmConditionEx | undefined {
    return this.shown.get(incidentId)?.cond;
  }

  /** The address space served, while the server runs. */
  get addressSpace(): AddressSpace | undefined {
    return this.server?.engine.addressSpace ?? undefined;
  }

  private enqueue<T>(work: () => Promise<T>): Promise<T> {
    const next = this.chain.then(work, work);
    this.chain = next.catch((e: unknown) => this.options.logger.warn({ err: (e as Error).message }, 'OPC UA update failed'));
    return next;
  }

  private buildAddressSpace(): void {
    const addressSpace = this.server!.engine.addressSpace!;
    addressSpace.installAlarmsAndConditionsService();
    const ns = addressSpace.getOwnNamespace();
    this.namespace = ns;
    const type = ns.addObjectType({ browseName: ALARM_TYPE_NAME, subtypeOf: 'AlarmConditionType', isAbstract: false });
    for (const name of INCIDENT_FIELDS) {
      ns.addVariable({ propertyOf: type, browseName: name, dataType: name === 'Evidence' ? DataType.String : DataType.String, valueRank: name === 'Evidence' ? 1 : -1, modellingRule: 'Mandatory' });
    }
    this.alarmType = type;
    const serverObject = addressSpace.rootFolder.objects.server;
    this.root = ns.addObject({ browseName: 'Wearshift', nodeId: 's=Wearshift', organizedBy: addressSpace.rootFolder.objects, notifierOf: serverObject, eventNotifier: 1 });
    // Calls with the method nodes of the types (as some clients make them) come here too.
    const acknowledgeable = addressSpace.findObjectType('AcknowledgeableConditionType')!;
    const condition = addressSpace.findObjectType('ConditionType')!;
    const shelving = addressSpace.findObjectType('ShelvedStateMachineType')!;
    this.bind(acknowledgeable.getMethodByName('Acknowledge')!, 'Acknowledge');
    this.bind(acknowledgeable.getMethodByName('Confirm')!, 'Confirm');
    this.bind(condition.getMethodByName('AddComment')!, 'AddComment');
    this.bind(shelving.getMethodByName('TimedShelve')!, 'TimedShelve');
    this.bind(shelving.getMethodByName('OneShotShelve')!, 'OneShotShelve');
    this.bind(shelving.getMethodByName('Unshelve')!, 'Unshelve');
  }

  private bind(method: UAMethod, name: MethodName): void {
    method.bindMethod(async (inputArguments: Variant[], context: ISessionContext): Promise<CallMethodResultOptions> => {
      const statusCode = await this.enqueue(() => this.call(name, inputArguments, context)).catch((e: unknown) => {
        this.options.logger.warn({ err: (e as Error).message, method: name }, 'OPC UA method failed');
        return StatusCodes.BadInternalError;
      });
      return { statusCode };
    });
  }

  /** A live event: applied in the next step of the chain, together with every other that came meanwhile. */
  private announce(event: LiveEvent): void {
    if (this.stopped) return;
    if (event.type === 'incident') this.pendingIncidents.add(event.incidentId);
    else this.pendingComponents.set(`${event.unit}/${event.component}`, { unit: event.unit, component: event.component });
    if (this.draining) return;
    this.draining = true;
    void this.enqueue(async () => {
      this.draining = false;
      const components = [...this.pendingComponents.values()];
      const incidents = [...this.pendingIncidents];
      this.pendingComponents.clear();
      this.pendingIncidents.clear();
      // A component appears in the address space with its first result (or its first open incident).
      for (const c of components) this.component(c.unit, c.component, false);
      for (const id of incidents) {
        // One incident that cannot be read does not hold up the others; the next refresh reads it again.
        await this.refresh(id).catch((e: unknown) => this.options.logger.warn({ err: (e as Error).message, incidentId: id }, 'OPC UA update failed'));
      }
    });
  }

  /**
   * The object of a component (and of its unit), made on first use. Past `limits.maxComponents` a component gets one
   * only for a condition (`forCondition`), whose number `limits.maxConditions` bounds.
   */
  private component(unit: string, component: string, forCondition: boolean): ComponentNode | undefined {
    const key = `${unit}/${component}`;
    const known = this.components.get(key);
    if (known !== undefined) return known;
    if (!forCondition && this.components.size >= this.config.limits.maxComponents) return undefined;
    const ns = this.namespace!;
    let unitNode = this.units.get(unit);
    if (unitNode === undefined) {
      unitNode = ns.addObject({ browseName: unit, nodeId: `s=unit:${unit}`, organizedBy: this.root!, notifierOf: this.root!, eventNotifier: 1 });
      this.units.set(unit, unitNode);
    }
    const node = ns.addObject({ browseName: component, nodeId: `s=component:${key}`, componentOf: unitNode, eventSourceOf: unitNode, eventNotifier: 1 });
    const openCount = ns.addVariable({ propertyOf: node, browseName: 'OpenIncidents', nodeId: `s=component:${key}/OpenIncidents`, dataType: DataType.UInt32, value: { dataType: DataType.UInt32, value: 0 } });
    const entry: ComponentNode = { node, openCount, open: 0 };
    this.components.set(key, entry);
    return entry;
  }

  /** One refresh pass at a time; a failed pass is logged and the next one (`refreshSeconds` later) tries again. Never rejects. */
  private refreshAll(): Promise<void> {
    this.refreshing ??= this.readAll()
      .catch((e: unknown) => this.options.logger.warn({ err: (e as Error).message }, `OPC UA: the open incidents could not be read; the server serves on and reads them again in ${this.config.refreshSeconds} s`))
      .finally(() => (this.refreshing = undefined));
    return this.refreshing;
  }

  /**
   * Builds the tree from the components on record (once), then reads every open incident, a page at a time, and
   * shows those whose summary changed since they were last shown; then reads once more the conditions the pass did
   * not find open (closed meanwhile). What it holds between pages is one page and one mark per condition shown.
   */
  private async readAll(): Promise<void> {
    if (!this.treeLoaded && this.options.components !== undefined) {
      const onRecord = await this.options.components(this.config.limits.maxComponents);
      for (let i = 0; i < onRecord.length; i += TREE_STEP) {
        await this.enqueue(async () => {
          for (const ref of onRecord.slice(i, i + TREE_STEP)) this.component(ref.unit, ref.component, false);
        });
      }
      this.treeLoaded = true;
    }
    const pass = ++this.pass;
    let leftOut = 0;
    let after: ListPosition | undefined;
    do {
      if (this.stopped) return;
      const page = await this.options.store.page({ state: 'open', limit: this.options.refreshPage ?? REFRESH_PAGE }, after);
      // One step per incident: a condition takes the library tens of milliseconds to make, and a method call waits for one step at most.
      for (const summary of page.incidents) if (!(await this.enqueue(() => this.refreshListed(summary, pass)))) leftOut += 1;
      after = page.next ?? undefined;
    } while (after !== undefined);
    const notFound = [...this.shown].filter(([, s]) => s.pass !== pass).map(([id]) => id);
    for (const id of notFound) {
      if (this.stopped) return;
      await this.enqueue(() => this.refresh(id));
    }
    if (leftOut > 0) this.options.logger.warn({ notShown: leftOut, maxConditions: this.config.limits.maxConditions }, 'OPC UA: more open incidents than opcua.limits.maxConditions; the rest are not shown as conditions');
  }

  /** An open incident met by a refresh pass; false when it is not shown because `limits.maxConditions` are. */
  private async refreshListed(summary: IncidentSummary, pass: number): Promise<boolean> {
    const known = this.shown.get(summary.id);
    if (known !== undefined && known.summary === digest(summary) && !oneShotEnds(summary)) {
      known.pass = pass;
      return true;
    }
    if (known === undefined && this.shown.size >= this.config.limits.maxConditions) return false;
    await this.refresh(summary.id);
    const now = this.shown.get(summary.id);
    if (now !== undefined) now.pass = pass;
    return true;
  }

  /** Reads one incident and shows its state; a one-shot shelving ends when the incident returns to normal. */
  private async refresh(incidentId: string): Promise<void> {
    if (this.server === undefined) return;
    let incident = await this.options.store.get(incidentId);
    if (incident === undefined) return this.remove(incidentId);
    if (oneShotEnds(incident)) {
      ({ incident } = await this.options.store.applyAction({ kind: 'unshelve', incidentId, by: 'OPC UA one-shot shelving', now: this.now() }));
    }
    this.show(incident);
  }

  private show(incident: Incident): void {
    const view = conditionView(incident);
    let entry = this.shown.get(incident.id);
    if (entry === undefined) {
      // A closed incident never shown stays away; past limits.maxConditions a new one waits for a free place.
      if (!view.retain || this.shown.size >= this.config.limits.maxConditions) return;
      entry = this.createCondition(view);
    }
    const { time: _time, ...rest } = view;
    const signature = JSON.stringify(rest);
    entry.summary = digest(summarize(incident));
    if (entry.signature !== signature) {
      applyView(entry.cond, view);
      entry.signature = signature;
      entry.eventIds = [...entry.eventIds, entry.cond.currentBranch().getEventId().toString('hex')].slice(-RECENT_EVENT_IDS);
    }
    if (!view.retain) this.remove(incident.id);
  }

  private createCondition(view: ConditionView): Shown {
    const component = this.component(view.unit, view.component, true)!;
    const cond = this.namespace!.instantiateAlarmCondition(this.alarmType!, {
      browseName: view.incidentId,
      nodeId: `s=incident:${view.incidentId}`,
      componentOf: component.node,
      conditionSource: component.node,
      conditionName: view.incidentId,
      // Part 9: the variable whose value the alarm state is computed from, or a null NodeId when it is not in the
      // address space (wearshift computes it from lab results). A node here would also get a listener per condition.
      inputNode: NodeId.nullNodeId,
      optionals: ['ConfirmedState', 'Confirm', 'ShelvingState'],
      maxTimeShelved: this.maxShelveMs,
    });
    // The library fills SourceName with the source's browse name ("1:gearbox"), the same for a component of that
    // name on every unit; an alarm list tells its alarms apart by it.
    cond.setSourceName(`${view.unit}/${view.component}`);
    // The library starts AckedState with Id false and no text, and applyView sets it only when it changes: set here,
    // it reads "Unacknowledged" from the first event on (applyView sets ActiveState and ConfirmedState every time).
    cond.currentBranch().setAckedState(false);
    // The instance's own method nodes (which clients find by browsing) act on the incident too.
    const methods = cond as unknown as Record<string, UAMethod | undefined>;
    const shelving = cond.shelvingState as unknown as Record<string, UAMethod | undefined> | undefined;
    for (const [node, name] of [
      [methods.acknowledge, 'Acknowledge'],
      [methods.confirm, 'Confirm'],
      [methods.addComment, 'AddComment'],
      [shelving?.timedShelve, 'TimedShelve'],
      [shelving?.oneShotShelve, 'OneShotShelve'],
      [shelving?.unshelve, 'Unshelve'],
    ] as const) {
      if (node !== undefined) this.bind(node, name);
    }
    const entry: Shown = { cond, component, signature: '', summary: '', eventIds: [], pass: 0 };
    this.shown.set(view.incidentId, entry);
    this.count(component, +1);
    return entry;
  }

  private remove(incidentId: string): void {
    const entry = this.shown.get(incidentId);
    if (entry === undefined) return;
    this.shown.delete(incidentId);
    this.namespace!.deleteNode(entry.cond);
    this.count(entry.component, -1);
  }

  private count(component: ComponentNode, change: number): void {
    component.open += change;
    component.openCount.setValueFromSource({ dataType: DataType.UInt32, value: component.open });
  }

  /** A client's method call: role check, the incident action, then the condition shows the incident's new state. */
  private async call(name: MethodName, args: Variant[], context: ISessionContext): Promise<StatusCode> {
    const target = this.targetOf(context.object);
    if (target === undefined) return StatusCodes.BadNodeIdInvalid;
    const user = userNameOf(context);
    const role: OpcuaRole | undefined = this.users.roleOf(user);
    if (role !== 'responder') return StatusCodes.BadUserAccessDenied;
    const incident = await this.options.store.get(target.incidentId);
    if (incident === undefined) return StatusCodes.BadNodeIdUnknown;
    const by = `${user} (OPC UA)`;
    const now = this.now();
    let action: IncidentAction | StatusCode;
    if (name === 'Acknowledge' || name === 'Confirm' || name === 'AddComment') {
      const eventId = args[0]?.value as Buffer | null | undefined;
      if (eventId && !this.shown.get(target.incidentId)?.eventIds.includes(eventId.toString('hex'))) return StatusCodes.BadEventIdUnknown;
      const comment = textOf(args[1]?.value);
      action = this.conditionAction(name, incident, target.incidentId, by, now, comment);
    } else action = this.shelvingAction(name, incident, target.incidentId, by, now, args);
    if (!isAction(action)) return action;
    try {
      const result = await this.options.store.applyAction(action);
      this.show(result.incident);
      return StatusCodes.Good;
    } catch (e) {
      if (e instanceof IncidentNotFoundError) return StatusCodes.BadNodeIdUnknown;
      if (e instanceof IncidentConflictError) return StatusCodes.BadInvalidState;
      if (e instanceof InputError) return StatusCodes.BadInvalidArgument;
      throw e;
    }
  }

  private conditionAction(name: 'Acknowledge' | 'Confirm' | 'AddComment', incident: Incident, incidentId: string, by: string, now: Date, comment: string | undefined): IncidentAction | StatusCode {
    if (incident.closed !== null) return name === 'Confirm' ? StatusCodes.BadConditionBranchAlreadyConfirmed : StatusCodes.BadInvalidState;
    if (name === 'Acknowledge') {
      if (incident.acknowledged !== null) return StatusCodes.BadConditionBranchAlreadyAcked;
      return { kind: 'acknowledge', incidentId, by, now, ...(comment !== undefined && { note: comment }) };
    }
    if (name === 'Confirm') {
      if (incident.acknowledged === null) return StatusCodes.BadInvalidState;
      return { kind: 'resolve', incidentId, by, now, note: comment ?? 'confirmed from the control room' };
    }
    if (comment === undefined) return StatusCodes.BadInvalidArgument;
    return { kind: 'note', incidentId, by, now, note: comment };
  }

  private shelvingAction(name: 'TimedShelve' | 'OneShotShelve' | 'Unshelve', incident: Incident, incidentId: string, by: string, now: Date, args: Variant[]): IncidentAction | StatusCode {
    if (incident.closed !== null) return StatusCodes.BadInvalidState;
    if (name === 'Unshelve') {
      if (incident.shelved === null) return StatusCodes.BadConditionNotShelved;
      return { kind: 'unshelve', incidentId, by, now };
    }
    if (incident.shelved !== null) return StatusCodes.BadConditionAlreadyShelved;
    if (name === 'OneShotShelve') {
      return { kind: 'shelve', incidentId, by, now, until: new Date(now.getTime() + this.oneShotHours * HOUR_MS), reason: `${ONE_SHOT_REASON}: until the incident returns to normal, at most ${this.oneShotHours} h` };
    }
    // MaxTimeShelved, as advertised: the shorter of opcua.maxShelveHours and incidents.maxShelveHours.
    const ms = Number(args[0]?.value);
    if (!Number.isFinite(ms) || ms <= 0 || ms > this.maxShelveMs) return StatusCodes.BadShelvingTimeOutOfRange;
    return { kind: 'shelve', incidentId, by, now, until: new Date(now.getTime() + ms), reason: `timed shelving from OPC UA for ${formatDuration(ms)}` };
  }

  /** The incident a method was called on: the condition itself, or its ShelvingState object. */
  private targetOf(object: unknown): { incidentId: string; cond: UAAlarmConditionEx } | undefined {
    for (const [incidentId, { cond }] of this.shown) {
      if (object === cond || object === cond.shelvingState) return { incidentId, cond };
    }
    return undefined;
  }
}

/** Event ids of a condition that a method call may name (clients answer the event they saw, which may not be the latest). */
const RECENT_EVENT_IDS = 20;

type MethodName = 'Acknowledge' | 'Confirm' | 'AddComment' | 'TimedShelve' | 'OneShotShelve' | 'Unshelve';

/** A one-shot shelving ends when its incident returns to normal (Part 9: OneShotShelved lasts until then). */
function oneShotEnds(incident: IncidentSummary): boolean {
  return incident.shelved !== null && incident.shelved.reason.startsWith(ONE_SHOT_REASON) && incident.alarm === 'returned' && incident.closed === null;
}

function digest(summary: IncidentSummary): string {
  return createHash('sha1').update(JSON.stringify(summary)).digest('base64');
}

function isAction(a: IncidentAction | StatusCode): a is IncidentAction {
  return typeof (a as IncidentAction).kind === 'string';
}

function userNameOf(context: ISessionContext): string | undefined {
  const token = (context.session as { userIdentityToken?: { userName?: unknown } } | undefined)?.userIdentityToken;
  return typeof token?.userName === 'string' ? token.userName : undefined;
}

function textOf(v: unknown): string | undefined {
  const t = typeof v === 'string' ? v : ((v as { text?: unknown } | null | undefined)?.text ?? undefined);
  return typeof t === 'string' && t.trim() !== '' ? t.trim() : undefined;
}

function formatDuration(ms: number): string {
  const h = ms / 3_600_000;
  return h >= 1 ? `${Number(h.toPrecision(3))} h` : `${Number((ms / 60_000).toPrecision(3))} min`;
}

/** Puts the incident's state on the condition and raises the condition event. */
function applyView(cond: UAAlarmConditionEx, view: ConditionView): void {
  const branch = cond.currentBranch();
  branch.setActiveState(view.active);
  if (branch.getAckedState() !== view.acked) branch.setAckedState(view.acked);
  branch.setConfirmedState(view.confirmed);
  if (view.comment !== undefined) branch.setComment(view.comment);
  const shelving = cond.shelvingState as unknown as ShelvingMachine | undefined;
  if (shelving !== undefined) {
    if (shelving.getCurrentState() !== view.shelving) shelving.setState(view.shelving);
    if (view.shelvedAt !== undefined && view.unshelveAt !== undefined) {
      shelving._shelvedTime = new Date(view.shelvedAt);
      shelving._duration = Math.max(0, view.unshelveAt - view.shelvedAt);
    } else shelving._unshelvedTime = new Date();
  }
  const field = (name: string, value: string | string[]) =>
    (cond.getPropertyByName(name) as UAVariable | null)?.setValueFromSource(new Variant({ dataType: DataType.String, value, ...(Array.isArray(value) && { arrayType: VariantArrayType.Array }) }) as never);
  field('IncidentId', view.incidentId);
  field('Unit', view.unit);
  field('Component', view.component);
  field('Measurand', view.measurand);
  field('Evidence', [...view.evidence]);
  cond.raiseNewCondition({ message: view.message, severity: view.severity, retain: view.retain, quality: StatusCodes.Good, time: view.time });
}
