/**
 * Who hears of an incident first, for the load figures: every tier-0 target (`channel:target`) of the escalation
 * policy that matches the incident's group, kind and highest severity. Later tiers hear only of what tier 0 leaves
 * unacknowledged, so they are not counted as the incident's responders.
 */
import type { EscalationPolicy } from '../domain/escalationConfig.ts';
import type { FigureIncident, ResponderMap } from './alarmFigures.ts';
import { recipients, selectPolicy } from './policy.ts';

export function tierZeroResponders(policies: readonly EscalationPolicy[]): ResponderMap {
  const targets = (p: EscalationPolicy) => recipients(p, 0, 0, 'wearshift.incident.opened').map((r) => `${r.channel}:${r.target}`);
  const all = [...new Set(policies.flatMap(targets))].sort();
  return {
    all,
    of: (i: FigureIncident) => {
      const policy = selectPolicy(policies, i.group, i.peakSeverity, i.kind);
      return policy === undefined ? [] : targets(policy);
    },
  };
}
