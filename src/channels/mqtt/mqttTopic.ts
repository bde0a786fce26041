/**
 * MQTT topics from a template such as `plant/{unit}/{component}/oil`. A unit name may hold `/`, `+` or `#`
 * (they are allowed in names); inside a topic they would add levels or act as wildcards, so placeholder
 * values are percent-encoded: `%` → %25, `/` → %2F, `+` → %2B, `#` → %23, controls and NUL → %XX.
 * The encoding is reversible, so two different units never share a topic.
 */
import type { IncidentMessage } from '../../notify/message.ts';
import { checkTemplate, fillTemplate } from '../../notify/template.ts';

export const DEFAULT_TOPIC_TEMPLATE = 'plant/{unit}/{component}/oil';

/** MQTT 3.1.1 §4.7.3: a topic name is at most 65535 bytes of UTF-8. */
const MAX_TOPIC_BYTES = 65_535;

/** Throws on a template that could not give a valid topic name to publish to. */
export function checkTopicTemplate(template: string): void {
  const what = 'MQTT topic template';
  checkTemplate(template, what);
  const fixed = template.replace(/\{[^{}]*\}/g, '');
  // MQTT 3.1.1 §4.7.1: wildcards are for subscriptions only; §1.5.3: no U+0000 in a UTF-8 string.
  if (/[+#]/.test(fixed) || fixed.includes('\u0000')) throw new TypeError(`${what} "${template}": "+", "#" and NUL are not allowed in a topic to publish to`);
  if (template === '') throw new TypeError(`${what} must not be empty`);
  // §4.7.2: topics starting with "$" belong to the broker.
  if (template.startsWith('$')) throw new TypeError(`${what} "${template}": topics starting with "$" are reserved for the broker`);
}

export function incidentTopic(template: string, msg: IncidentMessage): string {
  checkTopicTemplate(template);
  const topic = fillTemplate(template, msg, topicLevelText, 'MQTT topic template');
  const safe = topic.startsWith('$') ? `%24${topic.slice(1)}` : topic;
  if (Buffer.byteLength(safe, 'utf8') > MAX_TOPIC_BYTES) throw new TypeError(`incident ${msg.incident.id}: the MQTT topic would exceed ${MAX_TOPIC_BYTES} bytes`);
  return safe;
}

/** Text that stays within one topic level and means no wildcard. */
export function topicLevelText(value: string): string {
  // encodeURIComponent gives the UTF-8 bytes, so C1 control characters (U+0080–U+009F) decode back too.
  return value.replace(/[%/+#\p{Cc}]/gu, (c) => encodeURIComponent(c));
}
