/** The `opcua` section of the configuration: the OPC UA Alarms & Conditions server for control rooms. */
import { z } from 'zod';

export const OPCUA_SECURITY_MODES = ['None', 'Sign', 'SignAndEncrypt'] as const;
export const OPCUA_SECURITY_POLICIES = ['None', 'Basic256Sha256', 'Aes128_Sha256_RsaOaep', 'Aes256_Sha256_RsaPss'] as const;

const count = (min: number, max: number) => z.number().int().min(min).max(max);

/**
 * What the server holds at most. Every bound is advertised in Server/ServerCapabilities where OPC UA has a place for
 * it; a client beyond one is refused with the status the standard names (BadTooManySessions,
 * BadTooManySubscriptions, BadTooManyMonitoredItems) and the server goes on serving the others.
 */
export const OpcuaLimitsSchema = z
  .object({
    maxSessions: count(1, 1000).default(50).describe('Sessions at once, all clients and users together (ServerCapabilities MaxSessions).'),
    responderSessions: count(0, 1000)
      .default(10)
      .describe('Sessions kept for responders: viewer and anonymous sessions together may hold at most maxSessions minus this many, so that they cannot lock the control room out.'),
    maxSessionsPerUser: count(1, 1000).default(10).describe('Sessions one user name may hold at once; all anonymous sessions together count as one user.'),
    idleChannelSeconds: z
      .number()
      .min(1)
      .max(600)
      .default(10)
      .describe('A secure channel without an activated session (just opened, or its last session closed) is closed after this many seconds, so that connections nobody uses cannot fill the endpoint.'),
    pendingChannelsPerAddress: count(1, 1000)
      .default(4)
      .describe('Secure channels without an activated session one remote address may hold at once; a further one is closed at once. Clients activate their session a moment after connecting, so clients behind one address that connect in turn are not held back.'),
    sessionTimeoutSeconds: z
      .number()
      .min(10)
      .max(3600)
      .default(300)
      .describe('The longest session timeout granted (a client asking for more gets this): a session no request keeps alive for this long is closed and its slot freed.'),
    maxSubscriptions: count(1, 10_000).default(200).describe('Subscriptions at once on the server (ServerCapabilities MaxSubscriptions; at most 10 per session).'),
    maxMonitoredItems: count(1, 1_000_000).default(20_000).describe('Monitored items at once on the server (ServerCapabilities MaxMonitoredItems).'),
    maxMonitoredItemsPerSubscription: count(1, 1_000_000).default(5000).describe('Monitored items in one subscription (ServerCapabilities MaxMonitoredItemsPerSubscription).'),
    maxComponents: count(1, 1_000_000)
      .default(10_000)
      .describe('Component objects under Objects/Wearshift made from the components on record and from new results; a component with an open incident shown always has its object.'),
    maxConditions: count(1, 100_000)
      .default(1000)
      .describe(
        'Open incidents shown as conditions at once, in the order of the incident list (highest severity, then newest); more are left out and logged. Each condition costs the OPC UA stack about 0.2 MB and tens of milliseconds to make.',
      ),
  })
  .strict()
  .superRefine((l, ctx) => {
    if (l.responderSessions >= l.maxSessions) {
      ctx.addIssue({ code: 'custom', path: ['responderSessions'], message: `${l.responderSessions} sessions kept for responders leave none of maxSessions (${l.maxSessions}) to viewers: keep fewer than maxSessions` });
    }
  });
export type OpcuaLimits = z.infer<typeof OpcuaLimitsSchema>;

export const OpcuaConfigSchema = z
  .object({
    port: z.number().int().min(0).max(65535).optional().describe('opc.tcp port; `wearshift serve|api` starts the OPC UA server when this or --opcua-port is given (4840 is the registered OPC UA port).'),
    host: z.string().min(1).default('0.0.0.0').describe('Interface to listen on.'),
    advertisedHost: z
      .string()
      .regex(/^[\w.\-:[\]]+$/, 'expected a host name or an address, such as scada-gw.plant.example or 10.0.4.17')
      .optional()
      .describe(
        'Host name or address in the endpoint URL the server advertises (GetEndpoints, CreateSession) and in its self-signed certificate: the name clients reach it by. Default: `host`, unless that is 0.0.0.0 or ::, then the machine\'s fully qualified domain name.',
      ),
    resourcePath: z.string().regex(/^\/[\w\-/]*$/, 'expected a path such as /wearshift').default('/wearshift').describe('Path of the endpoint URL (opc.tcp://host:port/wearshift).'),
    securityModes: z.array(z.enum(OPCUA_SECURITY_MODES)).min(1).default(['SignAndEncrypt']).describe('Message security modes offered. Production: SignAndEncrypt only; None only on a closed test network.'),
    securityPolicies: z.array(z.enum(OPCUA_SECURITY_POLICIES)).min(1).default(['Basic256Sha256', 'Aes256_Sha256_RsaPss']).describe('Security policies offered with Sign and SignAndEncrypt (None is added when the mode None is offered).'),
    pkiDir: z.string().min(1).default('pki').describe('Certificate store: the server certificate and key (created self-signed on first start) and the trusted/ and rejected/ client certificates.'),
    trustUnknownClients: z.boolean().default(false).describe('Accept any client certificate. Keep false in production: move certificates from pki/rejected to pki/trusted instead.'),
    anonymous: z.enum(['none', 'viewer']).default('none').describe('What a session without user name gets: none (refused) or viewer (browse and subscribe, no methods).'),
    users: z
      .array(
        z
          .object({
            userName: z.string().min(1).max(80),
            passwordEnv: z.string().regex(/^[A-Z_][A-Z0-9_]*$/, 'expected an environment variable name').describe('Environment variable holding the password.'),
            role: z.enum(['viewer', 'responder']).describe('viewer: browse and subscribe; responder: also Acknowledge, Confirm, AddComment and the Shelve methods.'),
          })
          .strict(),
      )
      .default([])
      .describe('OPC UA user-name tokens and their wearshift role. User-name tokens (and anonymous ones with anonymous: viewer) are the only ones offered; X509 and issued user tokens are refused.'),
    maxShelveHours: z
      .number()
      .positive()
      .max(24 * 365)
      .default(168)
      .describe('MaxTimeShelved: the longest TimedShelve accepted; never more than incidents.maxShelveHours, which every shelving must keep.'),
    oneShotShelveHours: z
      .number()
      .positive()
      .max(24 * 365)
      .default(24)
      .describe('A OneShotShelve lasts until the incident returns to normal, at most this long; at most incidents.maxShelveHours.'),
    refreshSeconds: z.number().positive().max(3600).default(30).describe('Every so often the server re-reads the open incidents (expired shelving, missed live events).'),
    limits: OpcuaLimitsSchema.default(OpcuaLimitsSchema.parse({})).describe('Bounds on sessions, subscriptions, monitored items and the address space (see the README, "OPC UA alarms for the control room").'),
  })
  .strict();
export type OpcuaConfig = z.infer<typeof OpcuaConfigSchema>;
