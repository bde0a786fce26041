/** `{name}` placeholders in configured addresses (CloudEvents source, MQTT topic), filled from an incident. */
import { knownPlaceholdersText, TEMPLATE_FIELDS, type TemplateField } from '../domain/addressTemplate.ts';
import type { IncidentMessage } from './message.ts';

export { TEMPLATE_FIELDS, type TemplateField };

const PLACEHOLDER = /\{([^{}]*)\}/g;

/** Throws when the template names a field that does not exist, so that a typo fails at start-up. */
export function checkTemplate(template: string, what: string): void {
  for (const [, name] of template.matchAll(PLACEHOLDER)) {
    if (!(TEMPLATE_FIELDS as readonly string[]).includes(name ?? '')) {
      throw new TypeError(`${what} "${template}": unknown placeholder {${name}}; known: ${knownPlaceholdersText()}`);
    }
  }
}

/** Fills the template; every value passes through `encode`, so that it cannot change the address's structure. */
export function fillTemplate(template: string, msg: IncidentMessage, encode: (value: string) => string, what: string): string {
  checkTemplate(template, what);
  const values: Record<TemplateField, string> = {
    unit: msg.incident.unit,
    component: msg.incident.component,
    group: msg.incident.group,
    severity: msg.incident.severity,
    type: msg.type,
  };
  return template.replace(PLACEHOLDER, (_, name: TemplateField) => encode(values[name]));
}
