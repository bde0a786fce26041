/** Which escalation policy applies to an incident, and who of a tier hears of which event. */
import type { Config } from '../domain/config.ts';
import { CHANNEL_KINDS, TIER_TARGETS, type EscalationPolicy, type EscalationTier, type IncidentsConfig } from '../domain/escalationConfig.ts';
import type { IncidentKind, Severity } from '../domain/finding.ts';
import type { ChannelKind, IncidentEventType } from './model.ts';

/** The configuration the incident engine works by. */
export interface IncidentRules {
  readonly incidents: IncidentsConfig;
  readonly policies: readonly EscalationPolicy[];
}

export function incidentRules(config: Pick<Config, 'incidents' | 'escalation'>): IncidentRules {
  return { incidents: config.incidents, policies: config.escalation.policies };
}

export function selectPolicy(policies: readonly EscalationPolicy[], group: string, severity: Severity, kind: IncidentKind = 'machine'): EscalationPolicy | undefined {
  return policies.find(
    (p) =>
      (p.match.groups === undefined || p.match.groups.includes(group)) &&
      (p.match.severities === undefined || p.match.severities.includes(severity)) &&
      p.match.kinds.includes(kind),
  );
}

/**
 * E-mail carries what asks a person to act or tells them where the matter stands. That includes the return to
 * normal: the engine announces it only while nobody has acknowledged the incident (escalation.ts), and a returned,
 * unacknowledged alarm still asks for acknowledgement (ISA-18.2), so the people already told hear that the readings
 * are back to normal and that the incident still waits for one of them. Webhooks and MQTT, which mirror incident
 * state, get every event (`TIER_TARGETS`).
 */
const PERSON_EVENTS: ReadonlySet<IncidentEventType> = new Set([
  'wearshift.incident.opened',
  'wearshift.incident.updated',
  'wearshift.incident.escalated',
  'wearshift.incident.acknowledged',
  'wearshift.incident.returned',
  'wearshift.incident.closed',
]);

export interface Recipient {
  readonly channel: ChannelKind;
  readonly target: string;
  readonly tier: number;
}

/** The recipients of tiers `fromTier..toTier` for one event; someone named in several tiers hears it once, at the lowest. */
export function recipients(policy: EscalationPolicy, fromTier: number, toTier: number, type: IncidentEventType): Recipient[] {
  const seen = new Set<string>();
  const out: Recipient[] = [];
  const add = (channel: ChannelKind, target: string, tier: number) => {
    const id = `${channel}:${target}`;
    if (seen.has(id)) return;
    seen.add(id);
    out.push({ channel, target, tier });
  };
  policy.tiers.slice(fromTier, toTier + 1).forEach((tier: EscalationTier, i) => {
    const index = fromTier + i;
    for (const kind of CHANNEL_KINDS) {
      const { field, everyEvent } = TIER_TARGETS[kind];
      if (everyEvent || PERSON_EVENTS.has(type)) (tier[field] as readonly string[] | undefined)?.forEach((t) => add(kind, t, index));
    }
  });
  return out;
}
