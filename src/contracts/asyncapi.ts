/**
 * The AsyncAPI 3.0 document of the events wearshift sends: incident messages to webhooks (HTTP POST, Standard
 * Webhooks signatures) and to MQTT (QoS 1, or 2 where the channel's configuration says so; topic from a template,
 * default plant/{unit}/{component}/oil), both a CloudEvents 1.0 event in structured JSON; and the live events of the
 * API's server-sent event stream (`GET /v1/events`). Generated from the zod schemas in eventSchemas.ts; written to
 * schemas/asyncapi.json by `wearshift schema`.
 */
import { z } from 'zod';
import { API_VERSION } from './openapi.ts';
import { FloodSummaryCloudEventSchema, IncidentCloudEventSchema, LiveIncidentEventSchema, LiveResultEventSchema, WebhookHeadersSchema } from './eventSchemas.ts';

type Json = Record<string, unknown>;

function schemaOf(schema: z.ZodType): Json {
  const { $schema: _drop, ...rest } = z.toJSONSchema(schema, { io: 'output', unrepresentable: 'any' }) as Json;
  return rest;
}

export const DEFAULT_MQTT_TOPIC = 'plant/{unit}/{component}/oil';

/** How an MQTT channel's QoS is chosen (channels.mqtt[].qos), in the words of the document. */
const MQTT_QOS =
  'QoS 1 (at least once: receivers drop repeats by the CloudEvent id) by default, or QoS 2 (exactly once between wearshift and the broker) for a channel configured with qos: 2 (channels.mqtt[].qos). Never QoS 0, which may lose a message.';

export function asyncApiDocument(): Json {
  const message = { $ref: '#/components/messages/incidentEvent' };
  const summary = { $ref: '#/components/messages/floodSummary' };
  const liveIncident = { $ref: '#/components/messages/liveIncident' };
  const liveResult = { $ref: '#/components/messages/liveResult' };
  return {
    asyncapi: '3.0.0',
    info: {
      title: 'wearshift incident events',
      version: API_VERSION,
      description:
        'Incident changes (opened, updated, escalated, acknowledged, returned, closed), and the summary that ends an alarm flood\u2019s window, as CloudEvents 1.0 in structured JSON mode to webhooks and MQTT. Receivers de-duplicate on source + id; a retry carries the same id and time, and the recent results as they stand at that attempt. The API\u2019s live event stream (GET /v1/events, server-sent events) tells of incident changes and stored results as they happen. wearshift advises: the laboratory\u2019s diagnosis, the equipment maker\u2019s limits, local codes and licensed practice decide.',
    },
    defaultContentType: 'application/cloudevents+json',
    servers: {
      webhookReceiver: { host: 'receiver.example', protocol: 'https', description: 'Each configured webhook endpoint (channels.webhooks[].url).' },
      mqttBroker: { host: 'broker.example:8883', protocol: 'mqtt', description: 'Each configured broker (channels.mqtt[].url).' },
      api: { host: 'wearshift.example:8080', protocol: 'http', description: 'The wearshift HTTP API (wearshift serve or wearshift api).' },
    },
    channels: {
      webhook: {
        address: null,
        title: 'Webhook endpoint',
        description: 'POST to the configured URL. 2xx is delivered; 410 disables the endpoint; 429 and 503 are retried after Retry-After; other 5xx, timeouts and network errors are retried with exponential backoff.',
        servers: [{ $ref: '#/servers/webhookReceiver' }],
        messages: { incidentEvent: message, floodSummary: summary },
        bindings: { http: { bindingVersion: '0.3.0' } },
      },
      mqtt: {
        address: DEFAULT_MQTT_TOPIC,
        title: 'MQTT topic',
        description: `The topic template of channels.mqtt[].topic (placeholders {unit}, {component}, {group}, percent-encoded so that they add no level or wildcard). ${MQTT_QOS}`,
        servers: [{ $ref: '#/servers/mqttBroker' }],
        parameters: { unit: { description: 'The unit, percent-encoded.' }, component: { description: 'The component, percent-encoded.' } },
        messages: { incidentEvent: message, floodSummary: summary },
      },
      liveEvents: {
        address: '/v1/events',
        title: 'Live event stream',
        description:
          'GET /v1/events with a viewer or responder bearer token (or the wearshift_token cookie): text/event-stream, each event as "id: <n>", "event: incident|result" and "data: <JSON>", the data being one of these messages. Best effort: a client that reconnects reloads what it shows.',
        servers: [{ $ref: '#/servers/api' }],
        messages: { liveIncident, liveResult },
      },
    },
    operations: {
      sendWebhook: {
        action: 'send',
        channel: { $ref: '#/channels/webhook' },
        messages: [{ $ref: '#/channels/webhook/messages/incidentEvent' }, { $ref: '#/channels/webhook/messages/floodSummary' }],
        bindings: { http: { method: 'POST', bindingVersion: '0.3.0' } },
      },
      publishMqtt: {
        action: 'send',
        channel: { $ref: '#/channels/mqtt' },
        description: MQTT_QOS,
        messages: [{ $ref: '#/channels/mqtt/messages/incidentEvent' }, { $ref: '#/channels/mqtt/messages/floodSummary' }],
        // The binding holds one QoS; a channel's is configured (1 or 2), so the binding leaves it to the description.
        bindings: { mqtt: { retain: false, bindingVersion: '0.2.0' } },
      },
      streamLiveEvents: {
        action: 'send',
        channel: { $ref: '#/channels/liveEvents' },
        messages: [{ $ref: '#/channels/liveEvents/messages/liveIncident' }, { $ref: '#/channels/liveEvents/messages/liveResult' }],
      },
    },
    components: {
      messages: {
        incidentEvent: {
          name: 'incidentEvent',
          title: 'Incident event',
          contentType: 'application/cloudevents+json',
          headers: { ...schemaOf(WebhookHeadersSchema), description: 'Standard Webhooks headers (webhooks only; MQTT carries the event alone).' },
          payload: { $ref: '#/components/schemas/IncidentCloudEvent' },
        },
        floodSummary: {
          name: 'floodSummary',
          title: 'Alarm-flood summary',
          summary:
            'At the end of a window in which a target was sent channels.floodControl.maxMessages messages: every incident message held back, in one event. On MQTT it goes to the topic template with unit "wearshift" and component "flood-summary" (by default plant/wearshift/flood-summary/oil).',
          contentType: 'application/cloudevents+json',
          headers: { ...schemaOf(WebhookHeadersSchema), description: 'Standard Webhooks headers (webhooks only; MQTT carries the event alone).' },
          payload: { $ref: '#/components/schemas/FloodSummaryCloudEvent' },
        },
        liveIncident: {
          name: 'liveIncident',
          title: 'Incident change (live event stream)',
          summary: 'event: incident. One change of an incident, with the caution (advisory) beside its severity.',
          contentType: 'application/json',
          payload: { $ref: '#/components/schemas/LiveIncidentEvent' },
        },
        liveResult: {
          name: 'liveResult',
          title: 'Stored result (live event stream)',
          summary: 'event: result. A result stored (a history import\u2019s results once per component and job, its latest).',
          contentType: 'application/json',
          payload: { $ref: '#/components/schemas/LiveResultEvent' },
        },
      },
      schemas: {
        IncidentCloudEvent: schemaOf(IncidentCloudEventSchema),
        FloodSummaryCloudEvent: schemaOf(FloodSummaryCloudEventSchema),
        LiveIncidentEvent: schemaOf(LiveIncidentEventSchema),
        LiveResultEvent: schemaOf(LiveResultEventSchema),
      },
    },
  };
}
