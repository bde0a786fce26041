/**
 * Configuration of incidents, escalation policies and notification channels (the `incidents`, `escalation`
 * and `channels` sections). The incident engine reads the first two; the notification channels read the third.
 */
import { z } from 'zod';
import { DEFAULT_SOURCE_TEMPLATE, sourceTemplateProblem, TEMPLATE_FIELDS } from './addressTemplate.ts';
import { SEVERITIES } from './finding.ts';
import { webhookSecretProblem } from './webhookSecret.ts';

const positive = z.number().finite().positive();
const name = z.string().min(1).max(80).regex(/^[A-Za-z0-9][A-Za-z0-9._-]*$/, 'a name may hold letters, digits, . _ - only');
const envName = z.string().regex(/^[A-Z_][A-Z0-9_]*$/, 'expected an environment variable name such as WEBHOOK_SECRET');

export const IncidentsConfigSchema = z
  .object({
    scope: z
      .enum(['component', 'measurand'])
      .default('component')
      .describe('component: one open incident per unit/component; measurand: one per unit/component/measurand.'),
    returnAfterSamples: z
      .number()
      .int()
      .min(1)
      .default(2)
      .describe('Consecutive samples without findings after which an incident has returned to normal.'),
    reopenWithinSamples: z
      .number()
      .int()
      .min(0)
      .default(3)
      .describe('A finding within this many samples after the return to normal (or after closing) reopens the incident instead of opening a new one.'),
    maxShelveHours: positive
      .default(168)
      .describe('Longest allowed shelving; shelving is always time-limited so that nothing stays suppressed by oversight.'),
  })
  .strict();
export type IncidentsConfig = z.infer<typeof IncidentsConfigSchema>;

export const EscalationTierSchema = z
  .object({
    afterMinutes: z.number().finite().min(0).describe('Minutes after the incident was announced without acknowledgement; tier 0 is usually 0.'),
    email: z.array(z.email()).optional().describe('E-mail addresses.'),
    webhooks: z.array(name).optional().describe('Names of entries in channels.webhooks.'),
    mqtt: z.array(name).optional().describe('Names of entries in channels.mqtt.'),
  })
  .strict()
  .refine((t) => (t.email?.length ?? 0) + (t.webhooks?.length ?? 0) + (t.mqtt?.length ?? 0) > 0, {
    message: 'a tier needs at least one e-mail address, webhook or MQTT channel',
  });
export type EscalationTier = z.infer<typeof EscalationTierSchema>;

export const EscalationPolicySchema = z
  .object({
    name,
    match: z
      .object({
        groups: z.array(z.string().min(1)).min(1).optional().describe('Groups the policy applies to; absent: every group.'),
        severities: z.array(z.enum(SEVERITIES)).min(1).optional().describe('Incident severities the policy applies to; absent: every severity.'),
        kinds: z
          .array(z.enum(['machine', 'sampling']))
          .min(1)
          .default(['machine'])
          .describe('Incident kinds the policy applies to: machine (wear, condition, cleanliness) and/or sampling (sampling and data faults, for whoever takes the samples and the lab).'),
      })
      .strict()
      .default({ kinds: ['machine'] }),
    tiers: z
      .array(EscalationTierSchema)
      .min(1)
      .refine((tiers) => tiers.every((t, i) => i === 0 || t.afterMinutes >= tiers[i - 1]!.afterMinutes), {
        message: 'tiers must be in order of afterMinutes',
      }),
    repeatMinutes: positive.optional().describe('Re-send the last tier this often while the incident stays active and unacknowledged.'),
  })
  .strict();
export type EscalationPolicy = z.infer<typeof EscalationPolicySchema>;

export const EscalationSchema = z
  .object({
    policies: z
      .array(EscalationPolicySchema)
      .default([])
      .describe('The first policy whose match fits the incident applies; with none, incidents are recorded and listed but nobody is notified.'),
  })
  .strict()
  .refine((e) => new Set(e.policies.map((p) => p.name)).size === e.policies.length, { message: 'policy names must be unique', path: ['policies'] });
export type Escalation = z.infer<typeof EscalationSchema>;

const webhookSecret = z
  .string()
  .refine((s) => s.startsWith('whsec_') || /^[A-Z_][A-Z0-9_]*$/.test(s), {
    message: 'expected an environment variable name (such as WEBHOOK_SECRET) or a literal secret "whsec_<base64>"',
  })
  // A literal secret is checked here; one from the environment when the worker starts (src/channels/registry.ts).
  .superRefine((s, ctx) => {
    const problem = s.startsWith('whsec_') ? webhookSecretProblem(s) : undefined;
    if (problem !== undefined) ctx.addIssue({ code: 'custom', message: `${problem} (make one with: echo "whsec_$(openssl rand -base64 32)")` });
  });

/**
 * The CloudEvents `source` of the incident events a webhook or MQTT channel sends. A template that would not give a
 * URI reference is refused here, naming the channel's field, rather than by every delivery.
 */
const cloudEventSource = (sentTo: string) =>
  z
    .string()
    .superRefine((template, ctx) => {
      const problem = sourceTemplateProblem(template);
      if (problem !== undefined) ctx.addIssue({ code: 'custom', message: `the CloudEvents source template ${JSON.stringify(template)} ${problem}` });
    })
    .default(DEFAULT_SOURCE_TEMPLATE)
    .describe(
      `The CloudEvents \`source\` of the incident events ${sentTo}: a URI reference (RFC 3986) such as \`/plant-north/{unit}/{component}\` or \`urn:plant-north:{group}:{unit}\`, with the placeholders ${TEMPLATE_FIELDS.map((f) => `\`{${f}}\``).join(' ')}, each filled in percent-encoded. Default \`${DEFAULT_SOURCE_TEMPLATE}\`. Receivers de-duplicate on source + id: a message retried after the template changed carries the new source. The flood summary keeps its own source, \`/wearshift/flood-control\`.`,
    );

/** Alarm-flood handling by default: ten messages per target per ten minutes, then one summary. */
export const DEFAULT_FLOOD_CONTROL = { maxMessages: 10, windowMinutes: 10 };

/** The longest `channels.webhooks[].timeoutMs`: 5 minutes. */
export const WEBHOOK_TIMEOUT_MAX_MS = 300_000;

export const ChannelsSchema = z
  .object({
    email: z
      .object({
        from: z.string().min(3).describe('Sender, e.g. "wearshift <alerts@plant.example>".'),
        smtp: z
          .object({
            host: z.string().min(1),
            port: z.number().int().min(1).max(65535).default(587),
            secure: z.boolean().optional().describe('TLS from the start (port 465); absent: STARTTLS when the server offers it.'),
            user: z.string().optional(),
            passwordEnv: envName.optional().describe('Environment variable holding the SMTP password; needs user.'),
            deadlineMs: z
              .number()
              .int()
              .min(1000)
              .max(3_600_000)
              .optional()
              .describe(
                'Longest time in milliseconds one e-mail delivery attempt may take in all, from connecting to the answer to the message; default 60000 (60 s). The idle timeouts restart with every byte a slow server sends; this does not. Then the connection is closed and the message retried later with backoff; an attempt cut off after its data went out is recorded as possibly arrived.',
              ),
          })
          .strict()
          .refine((smtp) => smtp.passwordEnv === undefined || smtp.user !== undefined, {
            message: 'passwordEnv needs user: SMTP authentication sends the password only with a user name',
            path: ['user'],
          }),
      })
      .strict()
      .optional(),
    webhooks: z
      .array(
        z
          .object({
            name,
            url: z.url({ protocol: /^https?$/ }),
            secrets: z
              .array(webhookSecret)
              .min(1)
              .describe('Standard Webhooks signing secrets; several during a rotation. Each is an environment variable name or a literal whsec_ value.'),
            timeoutMs: z
              .number()
              .int()
              .positive()
              .max(WEBHOOK_TIMEOUT_MAX_MS, { error: `timeoutMs is at most ${WEBHOOK_TIMEOUT_MAX_MS} (5 minutes): a receiver that has not answered by then is called again later` })
              .default(10_000)
              .describe(
                `How long one delivery attempt waits for the receiver's answer, in milliseconds; default 10000, at most ${WEBHOOK_TIMEOUT_MAX_MS} (5 minutes), since each waiting attempt holds one of the webhook channel's delivery slots. Then the message is retried later with backoff; the attempt is recorded as possibly arrived.`,
              ),
            source: cloudEventSource('sent to this webhook'),
          })
          .strict(),
      )
      .default([]),
    mqtt: z
      .array(
        z
          .object({
            name,
            url: z.url({ protocol: /^(mqtts?|wss?)$/ }),
            topic: z
              .string()
              .min(1)
              .default('plant/{unit}/{component}/oil')
              .refine((t) => !/[+#]/.test(t.replace(/\{(unit|component|group)\}/g, '')), { message: 'a topic to publish to must not hold the wildcards + or #' })
              .refine((t) => (t.match(/\{[^}]*\}/g) ?? []).every((p) => ['{unit}', '{component}', '{group}'].includes(p)), {
                message: 'topic placeholders are {unit}, {component} and {group}',
              }),
            qos: z
              .union([z.literal(1), z.literal(2)], { error: 'qos is 1 (at least once) or 2 (exactly once); 0 is refused, as it may lose an alarm' })
              .default(1)
              .describe('1: at least once, receivers drop repeats by the CloudEvent id; 2: exactly once between wearshift and the broker. 0 is refused: it may lose a message.'),
            source: cloudEventSource('published on this channel'),
            username: z.string().optional(),
            passwordEnv: envName.optional(),
          })
          .strict()
          .superRefine((m, ctx) => {
            // What the publisher refuses (src/channels/mqtt/mqttTopic.ts) is refused here, when the configuration is read,
            // rather than by every delivery: MQTT 3.1.1 §4.7.2 leaves topics starting with "$" to the broker, §1.5.3
            // allows no NUL in a topic.
            const topicIssue = (problem: string) => ctx.addIssue({ code: 'custom', path: ['topic'], message: `MQTT channel "${m.name}": the topic ${problem}` });
            if (m.topic.startsWith('$')) topicIssue(`"${m.topic}" starts with "$": such topics are reserved for the broker`);
            if (m.topic.includes('\u0000')) topicIssue('holds a NUL character, which MQTT does not allow in a topic');
          }),
      )
      .default([]),
    floodControl: z
      .object({
        maxMessages: z.number().int().min(1).default(10).describe('Messages per target (e-mail address, webhook, MQTT channel) within one window; beyond them incidents are held back.'),
        windowMinutes: positive.default(10).describe('Length of the window; at its end, one summary lists every incident held back in it.'),
      })
      .strict()
      .default(DEFAULT_FLOOD_CONTROL)
      .describe('Alarm-flood handling (ISA-18.2): at most maxMessages per target per window, then one summary of the rest.'),
    ackLinks: z
      .object({
        baseUrl: z.url({ protocol: /^https?$/ }).describe('Public address of the HTTP API, for signed acknowledgement links in e-mails.'),
        secretEnv: envName.describe('Environment variable holding the link-signing secret.'),
        ttlHours: positive.default(72).describe('How long a link works.'),
      })
      .strict()
      .optional(),
  })
  .strict()
  .refine((c) => new Set(c.webhooks.map((w) => w.name)).size === c.webhooks.length, { message: 'webhook names must be unique', path: ['webhooks'] })
  .refine((c) => new Set(c.mqtt.map((m) => m.name)).size === c.mqtt.length, { message: 'MQTT channel names must be unique', path: ['mqtt'] });
export type Channels = z.infer<typeof ChannelsSchema>;

/** The notification channels; each has its folder under src/channels and one line in src/channels/registry.ts. */
export const CHANNEL_KINDS = ['email', 'webhook', 'mqtt'] as const;
export type ChannelKind = (typeof CHANNEL_KINDS)[number];

/**
 * Where an escalation tier lists each channel's targets, and which incident events the channel carries: e-mail only
 * the ones a person acts on (its reader sees the incident's state in every message), machines every event.
 */
export const TIER_TARGETS = {
  email: { field: 'email', everyEvent: false },
  webhook: { field: 'webhooks', everyEvent: true },
  mqtt: { field: 'mqtt', everyEvent: true },
} as const satisfies Record<ChannelKind, { field: keyof EscalationTier; everyEvent: boolean }>;

export interface ConfigIssue {
  readonly path: (string | number)[];
  readonly message: string;
}

/** Escalation tiers may only name channels that exist; found at load time rather than when the first alarm fires. */
export function escalationChannelIssues(escalation: Escalation, channels: Channels): ConfigIssue[] {
  const webhooks = new Set(channels.webhooks.map((w) => w.name));
  const mqtt = new Set(channels.mqtt.map((m) => m.name));
  const issues: ConfigIssue[] = [];
  escalation.policies.forEach((policy, p) =>
    policy.tiers.forEach((tier, t) => {
      const at = ['escalation', 'policies', p, 'tiers', t];
      if ((tier.email?.length ?? 0) > 0 && channels.email === undefined) issues.push({ path: [...at, 'email'], message: 'e-mail targets need channels.email' });
      tier.webhooks?.forEach((w, i) => {
        if (!webhooks.has(w)) issues.push({ path: [...at, 'webhooks', i], message: `no webhook named "${w}" in channels.webhooks` });
      });
      tier.mqtt?.forEach((m, i) => {
        if (!mqtt.has(m)) issues.push({ path: [...at, 'mqtt', i], message: `no MQTT channel named "${m}" in channels.mqtt` });
      });
    }),
  );
  return issues;
}
