/**
 * The shapes of the HTTP API's answers, for the OpenAPI document. Requests are validated by the routes' own zod
 * schemas (the result event, the incident filter, the action bodies), which the document reuses as they are;
 * the answers are written here once. Incident objects are described by their stable fields and allow more, so
 * that adding a field is not a breaking change.
 */
import { z } from 'zod';
import { ADVISORY_CAUTION } from '../domain/caution.ts';
import { SEVERITIES } from '../domain/finding.ts';
import { ROLES } from '../http/auth.ts';

const isoTime = z.string().describe('RFC 3339 date-time.');

export const FieldIssueSchema = z.object({ path: z.string().describe('Dotted path of the field, e.g. readings.Fe; empty for the record.'), reason: z.string() }).strict();

export const RecordOutcomeSchema = z
  .object({
    index: z.number().int().min(0).describe('Position in the request (0-based).'),
    line: z.number().int().min(1).optional().describe('Line of an NDJSON body (1-based).'),
    sampleId: z.string().optional(),
    status: z.enum(['accepted', 'rejected']),
    errors: z.array(FieldIssueSchema).optional(),
    moreErrors: z.number().int().min(0).optional().describe('Problems of this record not listed: the first 100 rejected records list up to 20 problems each, later ones three.'),
    conflict: z.literal(true).optional().describe('Refused because the same sampleId and revision is stored (or earlier in the request) with other content; a correction needs a higher revision.'),
    warnings: z.array(FieldIssueSchema).optional().describe('Accepted, but worth a look: e.g. a name that mixes scripts or is written in letters that look Latin.'),
  })
  .strict();

export const ResultOutcomesSchema = z.array(RecordOutcomeSchema).describe('One outcome per record, in order.');

export const ErrorBodySchema = z
  .object({
    error: z
      .string()
      .describe(
        'A machine-readable word: invalid-request (a field, named in issues), bad-request (a body that is not JSON or empty, a path that is not valid percent-encoding), unauthorized, forbidden, not-found, conflict, not-in-doubt, payload-too-large, too-many-records, too-many-requests, uri-too-long, unsupported-media-type, unavailable, internal.',
      ),
    message: z.string(),
    issues: z.array(z.object({ field: z.string(), message: z.string() }).strict()).optional(),
    maxBytes: z.number().int().positive().optional().describe('With payload-too-large: the body limit in bytes.'),
    maxRecords: z.number().int().positive().optional().describe('With too-many-records: the most records one request may hold.'),
    accepted: z.array(z.string()).optional().describe('With unsupported-media-type: the content types the route takes.'),
  })
  .strict();

const findingSchema = z
  .object({
    measurand: z.string(),
    rule: z.string(),
    severity: z.enum(SEVERITIES),
    disposition: z.string(),
    value: z.number(),
    threshold: z.number().optional(),
    basis: z.string(),
    sampleId: z.string(),
    sampledAt: isoTime,
    explanation: z.string(),
  })
  .loose();

const actor = z.object({ by: z.string(), at: isoTime }).loose();

export const IncidentSummarySchema = z
  .object({
    id: z.string().describe('unit/component[/measurand|/sampling]@openingSampleId'),
    key: z.string(),
    kind: z.enum(['machine', 'sampling']),
    unit: z.string(),
    component: z.string(),
    group: z.string(),
    measurand: z.string().optional(),
    openedAt: isoTime,
    openedBySampleId: z.string(),
    lastSampleId: z.string(),
    lastSampledAt: isoTime,
    alarm: z.enum(['active', 'returned']).describe('ISA-18.2 alarm state.'),
    severity: z.enum(SEVERITIES),
    peakSeverity: z.enum(SEVERITIES),
    evidence: z.array(findingSchema),
    activeFindings: z.array(findingSchema),
    withdrawnEvidence: z
      .array(findingSchema)
      .optional()
      .describe(
        'Of an incident closed because the history no longer produces it (closed.how withdrawn or sample-verdict): the findings it stood on, which no longer hold; never current evidence (evidence is then empty and alarm returned). Absent otherwise.',
      ),
    acknowledged: actor.nullable(),
    shelved: actor.extend({ until: isoTime, reason: z.string() }).nullable(),
    closed: z.object({ at: isoTime, how: z.string() }).loose().nullable(),
  })
  .loose();

export const IncidentSchema = IncidentSummarySchema.extend({
  timeline: z
    .array(z.object({ kind: z.string(), at: isoTime }).loose())
    .describe(
      'The verdict: findings, returns, operator actions, and each word a responder gave on a sample of the incident that a sampling finding put in doubt (kind sample-verdict: sampleId, verdict confirmed, rejected or withdrawn, by, and at, when it was given).',
    ),
  notifications: z
    .array(
      z
        .object({
          kind: z.literal('notified'),
          at: z.string().describe('RFC 3339 date-time: when the event was queued.'),
          targets: z.array(z.string()).describe('channel:target of every message queued for the event.'),
          withdrawn: z
            .array(
              z
                .object({
                  target: z.string().describe('channel:target, one of targets.'),
                  tier: z.number().int().min(0),
                  at: z.string().describe('RFC 3339 date-time: when the message was held back.'),
                  because: z.enum(['acknowledged', 'shelved', 'closed', 'returned']).describe('What had changed meanwhile.'),
                  reason: z.string().describe('In full, e.g. "the incident was acknowledged by R. Okafor at …".'),
                  attemptedAt: z
                    .string()
                    .optional()
                    .describe(
                      'RFC 3339 date-time: an earlier attempt of this message began then and ended without the channel answering (its worker stopped, or the receiver did not answer in time), so it may have reached the target. Absent when no such attempt was made.',
                    ),
                })
                .loose(),
            )
            .optional()
            .describe(
              'Messages of targets not sent after all, because the incident had changed by the time each was about to go out: shelved or closed (an announcement or an escalation), acknowledged or returned to normal (an escalation). Absent while none was held back.',
            ),
        })
        .loose(),
    )
    .describe('The messages about the incident: one entry per event, with the messages withdrawn before they went out.'),
}).loose();

const advisory = z.string().describe(`The caution that goes with every finding: "${ADVISORY_CAUTION}"`);

export const IncidentListSchema = z
  .object({
    incidents: z.array(IncidentSummarySchema).describe('One page of the list, in its order; at most `limit` incidents.'),
    next: z
      .string()
      .nullable()
      .describe(
        'An opaque cursor when more incidents may match after this page: pass it as `cursor` with the same filter for the next page. Null on the last page. A filtered list (severity, unit, group, a state within the open ones) reads at most 2 000 incident records per request (by default): a page that reached that bound ends early, with fewer than `limit` incidents or none, and `next` continues after the last record read.',
      ),
    total: z
      .number()
      .int()
      .nonnegative()
      .nullable()
      .describe(
        'How many incidents match the filter in all, now: always for a filter by state open, closed or all alone, and when the first page holds every match; null when it would take reading every incident (a state within the open ones, severity, unit, group).',
      ),
    advisory,
  })
  .strict();
export const IncidentEnvelopeSchema = z.object({ incident: IncidentSchema, advisory }).strict();

export const SessionSchema = z
  .object({ roles: z.array(z.enum(ROLES)).describe('The roles the token holds.'), timeZone: z.string().describe('display.timeZone: the zone times are shown in for people.') })
  .strict();

export const HealthSchema = z.object({ status: z.enum(['ok', 'ready', 'unavailable']), redis: z.string().optional() }).strict();

export const SeriesSchema = z
  .object({ unit: z.string(), component: z.string(), advisory })
  .loose()
  .describe(
    'Chart data of a component: readings per charge, wear rates, detector statistics against their limits, fixed and group limits, the oil-condition levels (`conditionLevels`), where each rule fired (`marks`, with severity and explanation), and `advisory`, the caution that goes with those findings.',
  );
