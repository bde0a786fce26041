/**
 * The CloudEvents 1.0 envelope (structured JSON mode) that webhooks and MQTT carry. Built only from the
 * message and the given time, so that every retry of one message carries byte-for-byte the same event.
 */
import { DEFAULT_SOURCE_TEMPLATE } from '../domain/addressTemplate.ts';
import type { IncidentMessage, IncidentMessageType } from './message.ts';
import { fillTemplate } from './template.ts';

export { DEFAULT_SOURCE_TEMPLATE };

export interface IncidentCloudEvent {
  specversion: '1.0';
  /** The message's idempotency key: receivers de-duplicate on source + id. */
  id: string;
  source: string;
  type: `wearshift.incident.${IncidentMessageType}`;
  time: string;
  datacontenttype: 'application/json';
  /** The incident id. */
  subject: string;
  data: IncidentMessage;
}

export interface CloudEventOptions {
  /** When the incident changed (not when this attempt is made), as a Date or an RFC 3339 string. */
  time: Date | string;
  /**
   * URI reference with placeholders {unit} {component} {group} {severity} {type}, each value percent-encoded. Default
   * `/wearshift/{unit}/{component}`. A configured one (`channels.webhooks[].source`, `channels.mqtt[].source`) is
   * checked when the configuration is read (`sourceTemplateProblem`, src/domain/addressTemplate.ts).
   */
  sourceTemplate?: string;
}

export function toCloudEvent(msg: IncidentMessage, options: CloudEventOptions): IncidentCloudEvent {
  const time = typeof options.time === 'string' ? new Date(options.time) : options.time;
  if (Number.isNaN(time.getTime())) throw new TypeError(`CloudEvent time must be a valid date, got "${String(options.time)}"`);
  if (msg.idempotencyKey === '') throw new TypeError(`incident ${msg.incident.id}: the message has an empty idempotency key`);
  return {
    specversion: '1.0',
    id: msg.idempotencyKey,
    source: fillTemplate(options.sourceTemplate ?? DEFAULT_SOURCE_TEMPLATE, msg, encodeURIComponent, 'CloudEvents source template'),
    type: `wearshift.incident.${msg.type}`,
    time: time.toISOString(),
    datacontenttype: 'application/json',
    subject: msg.incident.id,
    data: msg,
  };
}
