/**
 * node-opcua's OPCUAServer held to wearshift's bounds:
 *
 * - user tokens: only user-name tokens are offered and accepted, and anonymous ones when `opcua.anonymous` is viewer.
 *   node-opcua offers X509 user tokens on every endpoint and accepts any certificate by default, which would let a
 *   self-made certificate past `anonymous: none`; they, and issued tokens, are neither offered nor accepted;
 * - sessions: `SessionQuota` admits each activated session (per user, and responders' reserved share), and no client
 *   gets a session timeout above `limits.sessionTimeoutSeconds`, so an abandoned session frees its slot soon;
 * - connections: `ChannelGuard` closes a secure channel left without an activated session for
 *   `limits.idleChannelSeconds`, and any beyond `limits.pendingChannelsPerAddress` such channels from one address;
 * - subscriptions and monitored items: the limits go to ServerCapabilities, where the library enforces them;
 * - listeners: no node of the address space has Node's listener limit (see `liftNodeListenerLimit`).
 */
import { EventEmitter } from 'node:events';
import {
  AnonymousIdentityToken,
  CreateSessionRequest,
  OPCUAServer,
  StatusCodes,
  UserNameIdentityToken,
  UserTokenType,
  type AddressSpace,
  type OPCUAServerOptions,
  type ServerSecureChannelLayer,
  type ServerSession,
  type StatusCode,
} from 'node-opcua';
import type { OpcuaLimits } from '../domain/opcuaConfig.ts';
import type { OpcuaRole } from './opcuaUsers.ts';
import { ChannelGuard, type ChannelClosing } from './channelGuard.ts';
import { SessionQuota, type QuotaRefusal } from './sessionQuota.ts';

export interface ServerBounds {
  readonly limits: OpcuaLimits;
  /** Anonymous sessions are offered (as viewers). */
  readonly anonymous: boolean;
  /** The role of a session's user; undefined for an anonymous session. */
  readonly roleOf: (userName: string | undefined) => OpcuaRole | undefined;
  /** Told of every session refused by the quota. */
  readonly onRefused?: (refusal: QuotaRefusal, userName: string | undefined) => void;
  /** Told of every secure channel closed for holding no session. */
  readonly onChannelClosed?: (why: ChannelClosing, address: string) => void;
}

type AuthorizedCallback = (err: Error | null, isAuthorized?: boolean, statusCode?: StatusCode) => void;

export class BoundedOpcuaServer extends OPCUAServer {
  private readonly quota: SessionQuota<ServerSession>;
  private readonly channels: ChannelGuard<ServerSecureChannelLayer, ServerSession>;
  private readonly bounds: ServerBounds;

  constructor(options: OPCUAServerOptions, bounds: ServerBounds) {
    const l = bounds.limits;
    super({
      ...options,
      allowAnonymous: bounds.anonymous,
      // A client holds one connection per session at least; the quota then decides per user.
      maxConnectionsPerEndpoint: l.maxSessions,
      serverCapabilities: {
        ...options.serverCapabilities,
        maxSessions: l.maxSessions,
        maxSubscriptions: l.maxSubscriptions,
        maxMonitoredItems: l.maxMonitoredItems,
        maxMonitoredItemsPerSubscription: l.maxMonitoredItemsPerSubscription,
      },
    });
    this.bounds = bounds;
    this.quota = new SessionQuota(l);
    const offered = new Set<UserTokenType>([UserTokenType.UserName, ...(bounds.anonymous ? [UserTokenType.Anonymous] : [])]);
    // The endpoints are made by initialize(), before it announces the end.
    this.once('post_initialize', () => {
      for (const endpoint of this.endpoints) {
        for (const description of endpoint.endpointDescriptions()) {
          description.userIdentityTokens = (description.userIdentityTokens ?? []).filter((t) => offered.has(t.tokenType));
        }
      }
    });
    const longest = l.sessionTimeoutSeconds * 1000;
    // Emitted before the request is handled: the timeout the client asked for is capped, and the client is answered
    // the capped one (0 leaves the library's default of 30 s).
    this.on('request', (request) => {
      if (request instanceof CreateSessionRequest && request.requestedSessionTimeout > longest) request.requestedSessionTimeout = longest;
    });
    this.channels = new ChannelGuard(l, bounds.onChannelClosed);
    this.on('newChannel', (channel) => this.channels.opened(channel));
    this.on('closeChannel', (channel) => this.channels.channelClosed(channel));
    this.on('session_activated', (session) => {
      if (session.channel !== undefined) this.channels.activated(session, session.channel);
    });
    this.on('session_closed', (session) => {
      this.quota.release(session);
      this.channels.sessionClosed(session);
    });
  }

  /** Secure channels waiting for a session. */
  get waitingChannels(): number {
    return this.channels.waitingChannels;
  }

  /** Stops watching channels (before `shutdown`). */
  stopGuard(): void {
    this.channels.stop();
  }

  /** Sessions admitted and not closed. */
  get admittedSessions(): number {
    return this.quota.size;
  }

  /**
   * The last word on an ActivateSession, after the library has checked the token: any token but a user name (or an
   * anonymous one where offered) is refused, then the quota admits the session or refuses it with BadTooManySessions.
   */
  protected override isUserAuthorized(...args: Parameters<OPCUAServer['isUserAuthorized']>): void {
    const [channel, session, token, callback] = args as [Parameters<OPCUAServer['isUserAuthorized']>[0], ServerSession, unknown, AuthorizedCallback];
    const userName = token instanceof UserNameIdentityToken ? String(token.userName ?? '') : undefined;
    const anonymous = token instanceof AnonymousIdentityToken;
    if (userName === undefined && !(anonymous && this.bounds.anonymous)) {
      callback(null, false, StatusCodes.BadIdentityTokenRejected);
      return;
    }
    super.isUserAuthorized(channel, session, token as never, (err, authorized, statusCode) => {
      if (err !== null || authorized !== true) {
        callback(err, authorized, statusCode);
        return;
      }
      const role = this.bounds.roleOf(userName);
      if (role === undefined) {
        callback(null, false, StatusCodes.BadUserAccessDenied);
        return;
      }
      const refusal = this.quota.admit(session, { userName, role });
      if (refusal !== undefined) {
        this.bounds.onRefused?.(refusal, userName);
        callback(null, false, StatusCodes.BadTooManySessions);
        return;
      }
      callback(null, true);
    });
  }
}

/**
 * Node warns when an emitter gets more than 10 listeners, and writes the warning with util.inspect of the emitter;
 * node-opcua's nodes throw from their inspect without colours, and that throw, in the middle of a
 * CreateMonitoredItems, takes the whole process down. Every monitored item adds listeners to its node (the 11th client
 * watching the Server object's events was enough), and monitored items are bounded by the server's capabilities
 * instead, so no node has Node's limit: not those made so far (the standard nodes, wearshift's types), nor, through
 * the prototype every node shares, those made later (units, components, conditions, session diagnostics).
 */
export function liftNodeListenerLimit(addressSpace: AddressSpace): void {
  let proto: object | null = Object.getPrototypeOf(addressSpace.rootFolder) as object | null;
  while (proto !== null && Object.getPrototypeOf(proto) !== EventEmitter.prototype) proto = Object.getPrototypeOf(proto) as object | null;
  // EventEmitter's constructor copies `_maxListeners` from the prototype into each new node.
  if (proto !== null) Object.defineProperty(proto, '_maxListeners', { value: Infinity, writable: true, configurable: true });
  for (const ns of addressSpace.getNamespaceArray()) {
    for (const node of ns.nodeIterator()) (node as unknown as EventEmitter).setMaxListeners(0);
  }
}
