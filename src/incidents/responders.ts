/**
 * Who hears of an annunciation (an incident opening or becoming active again), for the load figures, as the live
 * annunciation (escalation.ts) tells it. An incident's escalation chain is that of the policy matching its group,
 * kind and severity when it was announced: at its opening, and again whenever new evidence went beyond what had been
 * announced (a higher severity than ever told, a new measurand), an acknowledgement was withdrawn or the incident
 * reopened after it had been closed; becoming active again without such news goes on with the chain already running. So an annunciation is heard by the tier-0 targets
 * of the chain running at that point of the timeline, and by those of any chain that new evidence starts before the
 * incident returns to normal; each target once per annunciation.
 *
 * Later tiers hear of an annunciation only while nobody acknowledges it: `reach(...).unanswered` lists who of them
 * would if nobody did (as a backtest assumes), a tier being reached when its delay after its chain's start passes
 * before the incident returns to normal or closes. Reminders (`repeatMinutes`) tell the same people of the same
 * annunciation again and are not counted.
 */
import type { EscalationPolicy } from '../domain/escalationConfig.ts';
import { maxSeverity, severityRank, type Severity } from '../domain/finding.ts';
import type { FigureIncident, ResponderMap } from './alarmFigures.ts';
import { recipients, selectPolicy } from './policy.ts';

const MINUTE = 60_000;

/** Who hears of one annunciation. */
export interface AnnunciationReach {
  /** The annunciation's time (the sampling time of the sample that caused it), ms since the epoch. */
  readonly t: number;
  /** The tier-0 targets (`channel:target`) of the chains running while it stays active. */
  readonly first: readonly string[];
  /** The targets of later tiers that would be told if nobody acknowledged, not already among `first`. */
  readonly unanswered: readonly string[];
}

/** The responders of the load figures: per annunciation, the tier-0 targets of the chain running at that point. */
export function tierZeroResponders(policies: readonly EscalationPolicy[]): ResponderMap {
  const all = [...new Set(policies.flatMap((p) => tierTargets(p, 0)))].sort();
  const reachOf = annunciationReach(policies);
  return {
    all,
    of: (i: FigureIncident, at?: number) => {
      const known = at === undefined ? undefined : reachOf(i).find((r) => r.t === at);
      if (known !== undefined) return known.first;
      // No annunciation at that time on the timeline (a probe without one): the policy of the highest severity.
      const policy = selectPolicy(policies, i.group, i.peakSeverity, i.kind);
      return policy === undefined ? [] : tierTargets(policy, 0);
    },
  };
}

/** Every target of a tier after the first that its policy's tier 0 does not name already, of any policy, sorted. */
export function laterTierTargets(policies: readonly EscalationPolicy[]): string[] {
  return [
    ...new Set(
      policies.flatMap((p) => {
        const first = new Set(tierTargets(p, 0));
        return p.tiers.flatMap((_, k) => (k === 0 ? [] : tierTargets(p, k).filter((t) => !first.has(t))));
      }),
    ),
  ].sort();
}

/** The reach of every annunciation of an incident, in time order; computed once per incident object. */
export function annunciationReach(policies: readonly EscalationPolicy[]): (i: FigureIncident) => readonly AnnunciationReach[] {
  const cache = new WeakMap<FigureIncident, readonly AnnunciationReach[]>();
  return (i) => {
    let known = cache.get(i);
    if (known === undefined) {
      known = reachOf(policies, i);
      cache.set(i, known);
    }
    return known;
  };
}

interface Chain {
  readonly policy: EscalationPolicy | undefined;
  readonly start: number;
}

interface Stretch {
  readonly t: number;
  readonly chains: Chain[];
  end: number;
}

function reachOf(policies: readonly EscalationPolicy[], i: FigureIncident): AnnunciationReach[] {
  const steps = stepsOf(i);
  const findings = new Map<string, { measurand: string; severity: Severity }>();
  const stretches: Stretch[] = [];
  let stretch: Stretch | null = null;
  let active = false;
  // What has been announced so far (escalation.ts: `announced`).
  const told: { severity: Severity | null; measurands: Set<string> } = { severity: null, measurands: new Set() };
  let chain: Chain | null = null;
  for (const { t, entries } of steps) {
    let began = false;
    let ended = false;
    let ackWithdrawn = false;
    let reopened = false;
    let openedAt: Severity | undefined;
    for (const e of entries) {
      switch (e.kind) {
        case 'finding': {
          const key = `${e.rule}|${e.measurand}|${e.direction ?? ''}`;
          if (e.change === 'cleared') findings.delete(key);
          else findings.set(key, { measurand: e.measurand, severity: e.severity });
          break;
        }
        case 'opened':
          openedAt = e.severity;
          began = true;
          break;
        case 'active-again':
          began = true;
          reopened ||= e.reopened;
          break;
        case 'returned':
        case 'closed':
          ended = true;
          break;
        case 'unacknowledged':
          ackWithdrawn = true;
          break;
        default:
          break;
      }
    }
    if (began) {
      active = true;
      stretch = { t, chains: [], end: Number.POSITIVE_INFINITY };
      stretches.push(stretch);
    }
    // The annunciation judges a step that leaves the incident active, by the findings it then holds (a timeline cut
    // short may have lost the raises of an old stretch: its opening severity, else its peak, stands in for them).
    const held = [...findings.values()];
    if (active && !ended && (held.length > 0 || began)) {
      const severity = held.length > 0 ? held.map((f) => f.severity).reduce(maxSeverity) : (openedAt ?? i.peakSeverity);
      const measurands = new Set(held.map((f) => f.measurand));
      const news = told.severity === null || severityRank(severity) > severityRank(told.severity) || [...measurands].some((m) => !told.measurands.has(m));
      if (news || ackWithdrawn || reopened) {
        told.severity = told.severity === null ? severity : maxSeverity(told.severity, severity);
        for (const m of measurands) told.measurands.add(m);
        const policy = selectPolicy(policies, i.group, severity, i.kind);
        // A chain of the same policy goes on; another policy, a withdrawn acknowledgement or a reopening starts one.
        if (chain === null || chain.policy !== policy || ackWithdrawn || reopened) chain = { policy, start: t };
      }
      if (stretch !== null && chain !== null && !stretch.chains.includes(chain)) stretch.chains.push(chain);
    }
    if (ended && active) {
      active = false;
      if (stretch !== null) stretch.end = t;
    }
  }
  return stretches.map((s) => {
    const first = new Set(s.chains.flatMap((c) => (c.policy === undefined ? [] : tierTargets(c.policy, 0))));
    const later = new Set<string>();
    for (const c of s.chains) {
      c.policy?.tiers.forEach((tier, k) => {
        if (k > 0 && c.start + tier.afterMinutes * MINUTE < s.end) for (const target of tierTargets(c.policy!, k)) if (!first.has(target)) later.add(target);
      });
    }
    return { t: s.t, first: [...first].sort(), unanswered: [...later].sort() };
  });
}

/** The timeline in time order (stable), entries of one instant together: the entries of one sample's step. */
function stepsOf(i: FigureIncident): Array<{ t: number; entries: FigureIncident['timeline'][number][] }> {
  const sorted = i.timeline.map((e, n) => ({ e, t: Date.parse(e.at), n })).sort((a, b) => a.t - b.t || a.n - b.n);
  const out: Array<{ t: number; entries: FigureIncident['timeline'][number][] }> = [];
  for (const { e, t } of sorted) {
    const last = out.at(-1);
    if (last !== undefined && last.t === t) last.entries.push(e);
    else out.push({ t, entries: [e] });
  }
  return out;
}

/** The targets (`channel:target`) a tier tells of an annunciation: tier 0 of the opening, later tiers of the escalation. */
function tierTargets(policy: EscalationPolicy, tier: number): string[] {
  return recipients(policy, tier, tier, tier === 0 ? 'wearshift.incident.opened' : 'wearshift.incident.escalated').map((r) => `${r.channel}:${r.target}`);
}
