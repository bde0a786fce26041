/**
 * The messages webhooks and MQTT deliver, as zod schemas for the AsyncAPI document: a CloudEvents 1.0 envelope in
 * structured JSON mode around the incident message (src/notify/message.ts, src/notify/cloudEvent.ts); and the live
 * events of the `GET /v1/events` stream (src/pipeline/liveEvent.ts, src/http/eventRoutes.ts).
 */
import { z } from 'zod';
import { FORECAST_OUTCOMES } from '../analysis/forecast/model.ts';
import { CHANNEL_KINDS } from '../domain/escalationConfig.ts';
import { SAMPLE_SUBJECT, SAMPLING_CHECKS, SEVERITIES } from '../domain/finding.ts';
import { INCIDENT_MESSAGE_TYPES } from '../notify/message.ts';
import { CLOSED_HOWS, CLOSING_VERDICTS } from '../incidents/model.ts';

const isoTime = z.string().describe('RFC 3339 date-time.');
const forecastTime = z.object({ oilHours: z.number(), hoursFromNow: z.number(), date: z.string().optional() }).strict();

const messageFinding = z
  .object({
    measurand: z.string().describe(`The measurand the finding is filed under; when subject is "${SAMPLE_SUBJECT}", not what the finding is about.`),
    subject: z
      .string()
      .describe(`What the finding is about: its measurand, or "${SAMPLE_SUBJECT}" for a sampling check that judges the whole sample (a duplicated bottle, hours going back, a new-oil bottle, another unit's sample).`),
    rule: z.string(),
    check: z.enum(SAMPLING_CHECKS).optional().describe('For the sampling rule: which check fired.'),
    severity: z.string(),
    value: z.number(),
    threshold: z.number().optional(),
    basis: z.string().describe("What value is: 'reading', 'rate', 'ewma', 'cusum', 'change', 'steps'."),
    sampleId: z.string(),
    sampledAt: isoTime,
    explanation: z.string(),
  })
  .strict();

export const IncidentMessageSchema = z
  .object({
    type: z.enum(INCIDENT_MESSAGE_TYPES),
    incident: z
      .object({
        id: z.string(),
        unit: z.string(),
        component: z.string(),
        group: z.string(),
        severity: z
          .enum(SEVERITIES)
          .describe(
            'The highest severity of the current evidence. In a closing whose evidence was set aside (closed.how withdrawn or sample-verdict; findings empty), the severity as last announced: such a message asks nothing.',
          ),
        peakSeverity: z.enum(SEVERITIES).describe('The highest severity the incident has reached.'),
        state: z.string().describe('In words, e.g. "active, unacknowledged".'),
        openedAt: isoTime,
        acknowledgedBy: z.string().optional(),
        tier: z.number().int().min(0).describe('Escalation tier reached; 0 before the first escalation.'),
        url: z.string().describe("The incident's page on the board."),
        apiUrl: z.string().describe("The incident's address in the JSON API."),
        closed: z
          .object({
            how: z
              .enum(CLOSED_HOWS)
              .describe(
                'acknowledged-and-returned; resolved (by hand); returned-unannounced; withdrawn (a late or corrected result took it out of the history: its findings no longer hold); sample-verdict (a responder judged the sample that opened it: rejected, its sampling findings were borne out and any other finding of it no longer holds; confirmed as genuine, its sampling findings no longer hold).',
              ),
            at: isoTime.describe('When it was closed (for sample-verdict: when the word was given).'),
            by: z.string().optional(),
            note: z.string().optional(),
            sampleId: z.string().optional().describe('With sample-verdict: the sample judged.'),
            verdict: z.enum(CLOSING_VERDICTS).optional().describe('With sample-verdict: the word on the sample.'),
          })
          .strict()
          .optional()
          .describe('How the incident was closed; present in closed messages only.'),
      })
      .strict(),
    findings: z.array(messageFinding).describe('The evidence, most severe first: the findings that opened or updated the incident; the severity is the highest of theirs.'),
    advisoryFindings: z
      .array(messageFinding)
      .describe(
        'Also on the evidence\u2019s sample: advisory findings (e.g. population band limits), which open no incident and take no part in the severity. Empty when there are none.',
      ),
    forecast: z
      .object({
        caution: z.string().describe('A forecast assumes the present trend continues.'),
        items: z.array(
          z
            .object({
              measurand: z.string(),
              severity: z.string(),
              source: z.string().describe('fixed, population or condition.'),
              side: z.enum(['above', 'below']),
              level: z.number(),
              outcome: z
                .enum(FORECAST_OUTCOMES)
                .describe(
                  'crossing: the central estimate falls within the horizon; already: the present estimate is beyond the level (an incident leaves such levels out, its findings say so); after-oil-change: beyond the planned oil change or the horizon, or the trend does not head towards the level; not-enough-history: no reliable forecast yet.',
                ),
              text: z.string(),
              central: forecastTime.optional(),
              early: forecastTime.optional().describe('10th percentile.'),
              late: forecastTime.optional().describe('90th percentile.'),
            })
            .strict(),
        ),
      })
      .strict()
      .optional()
      .describe('Time-to-limit forecasts of the evidence measurands, as of the evidence\u2019s sample; absent when forecasts are disabled, and in returned and closed messages (a forecast would not speak for the later results they show).'),
    recentResults: z.array(z.object({ sampleId: z.string(), sampledAt: isoTime, oilHours: z.number().optional(), readings: z.record(z.string(), z.string()) }).strict()).describe('The last few results, newest last.'),
    whatChanged: z.string().describe('One sentence of what changed.'),
    idempotencyKey: z.string().min(1).describe('The same key means the same message.'),
    advisory: z.string().describe('The tool advises; the lab, the equipment maker, local codes and licensed practice decide.'),
  })
  .strict();

export const IncidentCloudEventSchema = z
  .object({
    specversion: z.literal('1.0'),
    id: z.string().min(1).describe('The idempotency key: receivers de-duplicate on source + id.'),
    source: z.string().min(1).describe('URI reference: the channel\'s source template (channels.webhooks[].source, channels.mqtt[].source; default /wearshift/{unit}/{component}) filled with the incident\'s names, percent-encoded.'),
    type: z.enum(INCIDENT_MESSAGE_TYPES.map((t) => `wearshift.incident.${t}`) as [string, ...string[]]),
    time: isoTime.describe('When the incident changed (the same on every retry).'),
    datacontenttype: z.literal('application/json'),
    subject: z.string().describe('The incident id.'),
    data: IncidentMessageSchema,
  })
  .strict();

/** The summary that ends an alarm flood's window (src/notify/floodControl.ts, `floodSummaryEvent`). */
export const FloodSummaryCloudEventSchema = z
  .object({
    specversion: z.literal('1.0'),
    id: z.string().min(1).describe('flood-summary-<key of target and window>: receivers de-duplicate on source + id.'),
    source: z.literal('/wearshift/flood-control'),
    type: z.literal('wearshift.incidents.flood-summary'),
    time: isoTime.describe('The end of the window.'),
    datacontenttype: z.literal('application/json'),
    subject: z.string().describe('The target: a webhook or MQTT channel name.'),
    data: z
      .object({
        headline: z.string().describe('One line: how many messages on how many components were held back, and how many distinct incidents among them are at alarm (an incident held twice counts once).'),
        channel: z.enum(CHANNEL_KINDS),
        target: z.string(),
        window: z.object({ from: isoTime, until: isoTime }).strict(),
        maxMessages: z.number().int().positive().describe('Messages per target and window (channels.floodControl.maxMessages).'),
        held: z
          .array(
            z
              .object({
                incidentId: z.string(),
                unit: z.string(),
                component: z.string(),
                severity: z.enum(SEVERITIES),
                type: z.enum(INCIDENT_MESSAGE_TYPES),
                url: z.string().describe('The incident page on the board.'),
                at: isoTime,
              })
              .strict(),
          )
          .min(1)
          .describe('Every message held back, most severe first, then in time order.'),
        advisory: z.string().describe('The tool advises; the lab, the equipment maker, local codes and licensed practice decide.'),
      })
      .strict(),
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

/**
 * An incident change on the `GET /v1/events` stream (`event: incident`). The stream adds `advisory` to every one: a
 * board or gateway that shows the severity shows the caution with it.
 */
export const LiveIncidentEventSchema = z
  .object({
    type: z.literal('incident'),
    incidentId: z.string(),
    unit: z.string(),
    component: z.string(),
    severity: z
      .enum([...SEVERITIES, 'none'])
      .describe(
        'The highest severity of the current evidence. `none` on every event about an incident closed because its evidence was set aside (closed.how withdrawn or sample-verdict), whoever sends it: its closing and every change after it (the closing message\u2019s notified entry, a message withdrawn, a later word on its sample). Nothing of it stands and it asks nothing, as the e-mail\u2019s X-Wearshift-Severity says.',
      ),
    lastAnnouncedSeverity: z.enum(SEVERITIES).optional().describe('With severity `none`: the severity the incident had as last announced, which no longer stands.'),
    state: z.string().describe('The state after the change, in words, e.g. "active, unacknowledged".'),
    change: z
      .string()
      .describe('What happened: the timeline entry\u2019s kind ("opened", "acknowledged", "finding", "notified", "sample-verdict", ...), or "message withdrawn" when a queued message was not sent after all.'),
    at: isoTime,
    closed: z
      .object({
        how: z
          .enum(CLOSED_HOWS)
          .describe(
            'acknowledged-and-returned; resolved (by hand); returned-unannounced; withdrawn (a late or corrected result took its findings away); sample-verdict (a responder judged the sample in doubt that opened it). With withdrawn and sample-verdict the evidence was set aside: severity is `none`.',
          ),
        by: z.string().optional(),
        sampleId: z.string().optional().describe('With sample-verdict: the sample judged.'),
        verdict: z.enum(CLOSING_VERDICTS).optional().describe('With sample-verdict: the word on it.'),
      })
      .strict()
      .optional()
      .describe('On every event about a closed incident (its closing, change "closed", and any change after it): how the incident was closed, as data.incident.closed of the webhook and MQTT messages (without the note).'),
    advisory: z.string().describe('The tool advises; the lab, the equipment maker, local codes and licensed practice decide.'),
  })
  .strict();

/** A stored result on the `GET /v1/events` stream (`event: result`). */
export const LiveResultEventSchema = z
  .object({
    type: z.literal('result'),
    unit: z.string(),
    component: z.string(),
    sampleId: z.string(),
    sampledAt: isoTime,
  })
  .strict();
