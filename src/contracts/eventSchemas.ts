/**
 * The messages webhooks and MQTT deliver, as zod schemas for the AsyncAPI document: a CloudEvents 1.0 envelope in
 * structured JSON mode around the incident message (src/notify/message.ts, src/notify/cloudEvent.ts).
 */
import { z } from 'zod';
import { SEVERITIES } from '../domain/finding.ts';
import { INCIDENT_MESSAGE_TYPES } from '../notify/message.ts';

const isoTime = z.string().describe('RFC 3339 date-time.');

export const IncidentMessageSchema = z
  .object({
    type: z.enum(INCIDENT_MESSAGE_TYPES),
    incident: z
      .object({
        id: z.string(),
        unit: z.string(),
        component: z.string(),
        group: z.string(),
        severity: z.enum(SEVERITIES),
        state: z.string().describe('In words, e.g. "active, unacknowledged".'),
        openedAt: isoTime,
        acknowledgedBy: z.string().optional(),
        tier: z.number().int().min(0).describe('Escalation tier reached; 0 before the first escalation.'),
        url: z.string().describe("The incident's address in the API or on the board."),
      })
      .strict(),
    findings: z.array(
      z
        .object({
          measurand: z.string(),
          rule: z.string(),
          severity: z.string(),
          value: z.number(),
          threshold: z.number().optional(),
          basis: z.string().describe("What value is: 'reading', 'rate', 'ewma', 'cusum', 'change', 'steps'."),
          sampleId: z.string(),
          sampledAt: isoTime,
          explanation: z.string(),
        })
        .strict(),
    ),
    recentResults: z.array(z.object({ sampleId: z.string(), sampledAt: isoTime, oilHours: z.number().optional(), readings: z.record(z.string(), z.string()) }).strict()).describe('The last few results, newest last.'),
    whatChanged: z.string().describe('One sentence of what changed.'),
    idempotencyKey: z.string().min(1).describe('The same key means the same message.'),
  })
  .strict();

export const IncidentCloudEventSchema = z
  .object({
    specversion: z.literal('1.0'),
    id: z.string().min(1).describe('The idempotency key: receivers de-duplicate on source + id.'),
    source: z.string().min(1).describe('URI reference, default /wearshift/{unit}/{component}.'),
    type: z.enum(INCIDENT_MESSAGE_TYPES.map((t) => `wearshift.incident.${t}`) as [string, ...string[]]),
    time: isoTime.describe('When the incident changed (the same on every retry).'),
    datacontenttype: z.literal('application/json'),
    subject: z.string().describe('The incident id.'),
    data: IncidentMessageSchema,
  })
  .strict();

/** Standard Webhooks headers of a webhook delivery. */
export const WebhookHeadersSchema = z
  .object({
    'webhook-id': z.string().min(1).describe('The event id, the same on every retry.'),
    'webhook-timestamp': z.string().regex(/^\d+$/).describe('Unix seconds of the attempt.'),
    'webhook-signature': z.string().regex(/^v1,[A-Za-z0-9+/=]+( v1,[A-Za-z0-9+/=]+)*$/).describe('v1,<base64 HMAC-SHA256 of "id.timestamp.body"> keyed by the whsec_ secret; two during a rotation.'),
    'content-type': z.string().regex(/^application\/cloudevents\+json/),
  })
  .loose();
