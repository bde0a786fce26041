/**
 * The OPC UA Alarms & Conditions server (IEC 62541-9) for control rooms: every unit and component in the
 * address space under Objects/Wearshift, every open incident an alarm condition on its component, with the
 * evidence as event fields. Acknowledge, Confirm, AddComment and the Shelve methods called by a client act on
 * the incident through the same incident store as the HTTP API (role-checked), and every incident change made
 * anywhere (worker, API, board, e-mail link) is shown at once from the live events. ConditionRefresh is
 * answered by the library from the retained conditions.
 */
import {
  DataType,
  MessageSecurityMode,
  OPCUACertificateManager,
  OPCUAServer,
  RegisterServerMethod,
  SecurityPolicy,
  StatusCodes,
  Variant,
  VariantArrayType,
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
import type { Incident } from '../incidents/model.ts';
import type { IncidentRoutesStore } from '../http/incidentRoutes.ts';
import type { LiveEvent } from '../pipeline/liveEvent.ts';
import type { Logger } from '../telemetry/logger.ts';
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
}

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
  private server: OPCUAServer | undefined;
  private certificateStore: OPCUACertificateManager | undefined;
  private namespace: Namespace | undefined;
  private alarmType: UAObjectType | undefined;
  private root: UAObject | undefined;
  private readonly units = new Map<string, UAObject>();
  private readonly components = new Map<string, ComponentNode>();
  private readonly conditions = new Map<string, UAAlarmConditionEx>();
  /** Per condition: the state last shown, and the event ids raised for it (a client may answer any recent one). */
  private readonly shown = new Map<string, { signature: string; eventIds: string[] }>();
  /** Every change to the address space runs in this chain, one at a time. */
  private chain: Promise<unknown> = Promise.resolve();
  private timer: NodeJS.Timeout | undefined;
  private unsubscribe: (() => void) | undefined;

  constructor(private readonly options: OpcuaAlarmServerOptions) {
    this.config = options.config;
    this.users = new OpcuaUsers(options.config, options.env ?? process.env);
    this.now = options.now ?? (() => new Date());
  }

  /** Starts listening; resolves with the endpoint URL. */
  async start(): Promise<string> {
    const c = this.config;
    const certificates = new OPCUACertificateManager({ rootFolder: c.pkiDir, automaticallyAcceptUnknownCertificate: c.trustUnknownClients });
    await certificates.initialize();
    this.certificateStore = certificates;
    const policies = c.securityPolicies.map((p) => POLICIES[p]);
    if (c.securityModes.includes('None') && !policies.includes(SecurityPolicy.None)) policies.unshift(SecurityPolicy.None);
    const server = new OPCUAServer({
      port: this.options.port ?? c.port ?? 4840,
      host: c.host,
      resourcePath: c.resourcePath,
      securityModes: c.securityModes.map((m) => MODES[m]),
      securityPolicies: policies,
      allowAnonymous: c.anonymous !== 'none',
      userManager: { isValidUser: (userName: string, password: string) => this.users.isValidUser(userName, password) },
      serverCertificateManager: certificates,
      registerServerMethod: RegisterServerMethod.HIDDEN,
      maxConnectionsPerEndpoint: 50,
      serverCapabilities: { maxSessions: 50 } as never,
      buildInfo: { productName: 'wearshift', productUri: 'urn:wearshift', manufacturerName: 'wearshift' },
    });
    this.server = server;
    await server.initialize();
    this.buildAddressSpace();
    await server.start();
    await this.enqueue(() => this.refreshAll());
    this.unsubscribe = this.options.subscribe?.((event) => {
      if (event.type === 'incident') void this.enqueue(() => this.refresh(event.incidentId));
      // A component appears in the address space with its first result (or its first open incident).
      else void this.enqueue(async () => void this.component(event.unit, event.component));
    });
    this.timer = setInterval(() => void this.enqueue(() => this.refreshAll()), c.refreshSeconds * 1000);
    this.timer.unref();
    return server.getEndpointUrl();
  }

  async stop(): Promise<void> {
    if (this.timer !== undefined) clearInterval(this.timer);
    this.unsubscribe?.();
    await this.chain.catch(() => undefined);
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
    return this.conditions.get(incidentId);
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

  private component(unit: string, component: string): ComponentNode {
    const key = `${unit}/${component}`;
    const known = this.components.get(key);
    if (known !== undefined) return known;
    const ns = this.namespace!;
    let unitNode = this.units.get(unit);
    if (unitNode === undefined) {
      unitNode = ns.addObject({ browseName: unit, nodeId: `s=unit:${unit}`, organizedBy: this.root!, notifierOf: this.root!, eventNotifier: 1 });
      this.units.set(unit, unitNode);
    }
    const node = ns.addObject({ browseName: component, nodeId: `s=component:${key}`, componentOf: unitNode, eventSourceOf: unitNode, eventNotifier: 1 });
    const openCount = ns.addVariable({ propertyOf: node, browseName: 'OpenIncidents', nodeId: `s=component:${key}/OpenIncidents`, dataType: DataType.UInt32, value: { dataType: DataType.UInt32, value: 0 } });
    const entry = { node, openCount };
    this.components.set(key, entry);
    return entry;
  }

  private async refreshAll(): Promise<void> {
    const open = await this.options.store.list({ state: 'open', limit: 1000 });
    const ids = new Set(open.map((i) => i.id));
    for (const id of [...ids, ...[...this.conditions.keys()].filter((k) => !ids.has(k))]) await this.refresh(id);
  }

  /** Reads one incident and shows its state; a one-shot shelving ends when the incident returns to normal. */
  private async refresh(incidentId: string): Promise<void> {
    let incident = await this.options.store.get(incidentId);
    if (incident === undefined) return this.remove(incidentId);
    if (incident.shelved?.reason.startsWith(ONE_SHOT_REASON) && incident.alarm === 'returned' && incident.closed === null) {
      ({ incident } = await this.options.store.applyAction({ kind: 'unshelve', incidentId, by: 'OPC UA one-shot shelving', now: this.now() }));
    }
    this.show(incident);
  }

  private show(incident: Incident): void {
    const view = conditionView(incident);
    let cond = this.conditions.get(incident.id);
    if (cond === undefined) {
      if (!view.retain) return;
      cond = this.createCondition(view);
    }
    const { time: _time, ...rest } = view;
    const signature = JSON.stringify(rest);
    const before = this.shown.get(incident.id);
    if (before?.signature !== signature) {
      applyView(cond, view);
      const eventIds = [...(before?.eventIds ?? []), cond.currentBranch().getEventId().toString('hex')].slice(-RECENT_EVENT_IDS);
      this.shown.set(incident.id, { signature, eventIds });
    }
    if (!view.retain) this.remove(incident.id);
    this.updateCount(view.unit, view.component);
  }

  private createCondition(view: ConditionView): UAAlarmConditionEx {
    const { node, openCount } = this.component(view.unit, view.component);
    const cond = this.namespace!.instantiateAlarmCondition(this.alarmType!, {
      browseName: view.incidentId,
      nodeId: `s=incident:${view.incidentId}`,
      componentOf: node,
      conditionSource: node,
      conditionName: view.incidentId,
      inputNode: openCount,
      optionals: ['ConfirmedState', 'Confirm', 'ShelvingState'],
      maxTimeShelved: this.config.maxShelveHours * 3_600_000,
    });
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
    this.conditions.set(view.incidentId, cond);
    return cond;
  }

  private remove(incidentId: string): void {
    const cond = this.conditions.get(incidentId);
    if (cond === undefined) return;
    this.conditions.delete(incidentId);
    this.shown.delete(incidentId);
    this.namespace!.deleteNode(cond);
  }

  private updateCount(unit: string, component: string): void {
    const entry = this.components.get(`${unit}/${component}`);
    if (entry === undefined) return;
    const n = [...this.conditions.keys()].filter((id) => id.startsWith(`${unit}/${component}/`) || id.startsWith(`${unit}/${component}@`)).length;
    entry.openCount.setValueFromSource({ dataType: DataType.UInt32, value: n });
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
      return { kind: 'shelve', incidentId, by, now, until: new Date(now.getTime() + this.config.oneShotShelveHours * 3_600_000), reason: `${ONE_SHOT_REASON}: until the incident returns to normal, at most ${this.config.oneShotShelveHours} h` };
    }
    const ms = Number(args[0]?.value);
    if (!Number.isFinite(ms) || ms <= 0 || ms > this.config.maxShelveHours * 3_600_000) return StatusCodes.BadShelvingTimeOutOfRange;
    return { kind: 'shelve', incidentId, by, now, until: new Date(now.getTime() + ms), reason: `timed shelving from OPC UA for ${formatDuration(ms)}` };
  }

  /** The incident a method was called on: the condition itself, or its ShelvingState object. */
  private targetOf(object: unknown): { incidentId: string; cond: UAAlarmConditionEx } | undefined {
    for (const [incidentId, cond] of this.conditions) {
      if (object === cond || object === cond.shelvingState) return { incidentId, cond };
    }
    return undefined;
  }
}

/** Event ids of a condition that a method call may name (clients answer the event they saw, which may not be the latest). */
const RECENT_EVENT_IDS = 20;

type MethodName = 'Acknowledge' | 'Confirm' | 'AddComment' | 'TimedShelve' | 'OneShotShelve' | 'Unshelve';

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
