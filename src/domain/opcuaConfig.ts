/** The `opcua` section of the configuration: the OPC UA Alarms & Conditions server for control rooms. */
import { z } from 'zod';

export const OPCUA_SECURITY_MODES = ['None', 'Sign', 'SignAndEncrypt'] as const;
export const OPCUA_SECURITY_POLICIES = ['None', 'Basic256Sha256', 'Aes128_Sha256_RsaOaep', 'Aes256_Sha256_RsaPss'] as const;

export const OpcuaConfigSchema = z
  .object({
    port: z.number().int().min(0).max(65535).optional().describe('opc.tcp port; `wearshift serve|api` starts the OPC UA server when this or --opcua-port is given (4840 is the registered OPC UA port).'),
    host: z.string().min(1).default('0.0.0.0').describe('Interface to listen on.'),
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
      .describe('OPC UA user-name tokens and their wearshift role.'),
    maxShelveHours: z.number().positive().max(24 * 365).default(168).describe('MaxTimeShelved: the longest TimedShelve accepted.'),
    oneShotShelveHours: z.number().positive().max(24 * 365).default(24).describe('A OneShotShelve lasts until the incident returns to normal, at most this long.'),
    refreshSeconds: z.number().positive().max(3600).default(30).describe('Every so often the server re-reads the open incidents (expired shelving, missed live events).'),
  })
  .strict();
export type OpcuaConfig = z.infer<typeof OpcuaConfigSchema>;
