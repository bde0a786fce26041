/**
 * The alarm-management key figures of a list of incidents over a period, pure (the clock is `to`, passed in): the
 * figures ISA-18.2 / IEC 62682 and EEMUA 191 ask a site to watch, in this product's terms.
 *
 * - An annunciation is an incident going into the alarm state: its opening, or its becoming active again after a
 *   return to normal or a closing. Its time is the sampling time of the sample that caused it.
 * - Load per responder: the annunciations each responder hears of (the ResponderMap says who hears of which; for the
 *   escalation policies, responders.ts), per calendar day (UTC) and per week (Monday to Sunday, UTC), counted at the
 *   annunciation's time: the average over the period and the peak day or week.
 * - Standing: in the active alarm state (acknowledged or not) for longer than `standingAfterDays`.
 * - Stale: open, unacknowledged and not shelved for longer than `staleAfterDays` (still asking for a response).
 * - An incident only ever seen in quiet backfill (`live: false`) asked nobody: it loads no responder and is not stale.
 * - Chattering: active again within `chatteringWithinDays` of the return to normal (or of the closing of an incident
 *   closed while active), or a new incident of the same key opened within that time of the previous one's end.
 * - Bad actors: the components with the most annunciations and the rule/measurand pairs raised in the most incidents;
 *   a sampling check that judges the whole sample pairs with `sample`, not with the measurand it is filed under.
 * Incidents a late result withdrew are not counted (they are not what production keeps).
 */
import type { AlarmFiguresConfig } from '../domain/alarmFiguresConfig.ts';
import { RULE_FAMILIES, subjectOf, type FindingSubject, type IncidentKind, type RuleFamily, type Severity } from '../domain/finding.ts';
import type { TimelineEntry } from './model.ts';
import { closingVerdict } from './sampleVerdict.ts';

const DAY_MS = 86_400_000;
const YEAR_MS = 365.25 * DAY_MS;

/** What the figures need of an incident (an Incident satisfies it). */
export interface FigureIncident {
  readonly id: string;
  readonly key: string;
  readonly unit: string;
  readonly component: string;
  readonly group: string;
  readonly kind: IncidentKind;
  readonly peakSeverity: Severity;
  readonly timeline: readonly TimelineEntry[];
  /**
   * False when the incident was only ever seen in quiet backfill (results older than backfill.quietAfterDays when
   * they arrived): nobody was asked to respond, so it loads no responder and cannot go stale. A backtest leaves it
   * out, to count every incident as if its results had arrived live.
   */
  readonly live?: boolean;
}

export type FigureThresholds = Pick<AlarmFiguresConfig, 'standingAfterDays' | 'staleAfterDays' | 'chatteringWithinDays' | 'topBadActors'>;

/** Who hears of an annunciation first: the tier-0 targets of the escalation chain running at that point. */
export interface ResponderMap {
  /** Every tier-0 target the configuration names, so that a responder who heard nothing is listed with 0. */
  readonly all: readonly string[];
  /** @param at the annunciation's time (ms since the epoch), which decides the escalation chain that tells of it. */
  readonly of: (incident: FigureIncident, at?: number) => readonly string[];
}

export interface AlarmFigureInput {
  readonly incidents: readonly FigureIncident[];
  /** Start of the period, ms since the epoch. */
  readonly from: number;
  /** End of the period and the clock of the "now" figures (standing, stale, open), ms since the epoch. */
  readonly to: number;
  readonly thresholds: FigureThresholds;
  readonly responders: ResponderMap;
  /** Component-years watched in the period, for the rates per 100 component-years; null when unknown. */
  readonly componentYears?: number | null;
}

export interface Rate {
  readonly average: number;
  readonly peak: number;
  /** The peak day (YYYY-MM-DD) or the Monday of the peak week; null without annunciations. */
  readonly peakAt: string | null;
}

export interface ResponderLoad {
  /** `channel:target`, e.g. `email:oncall@plant.example`. */
  readonly responder: string;
  readonly annunciations: number;
  readonly perDay: Rate;
  readonly perWeek: Rate;
}

export interface DurationFigure {
  readonly afterDays: number;
  /** Incidents in this condition at the end of the period. */
  readonly atEnd: number;
  /** Most incidents in this condition at once during the period, and when it was first reached. */
  readonly peak: number;
  readonly peakAt: string | null;
  /** Incidents in this condition at some time during the period. */
  readonly incidents: number;
  /** Ids of those at the end. */
  readonly ids: readonly string[];
}

export interface AlarmFigures {
  readonly period: { readonly from: string; readonly to: string; readonly days: number };
  /** Incidents opened in the period. */
  readonly incidents: number;
  readonly per100ComponentYears: number | null;
  /** Incidents opened in the period that the family raised a finding in. */
  readonly byFamily: Readonly<Record<RuleFamily, { readonly incidents: number; readonly per100ComponentYears: number | null }>>;
  readonly annunciations: number;
  /** Incidents not closed at the end of the period. */
  readonly openAtEnd: number;
  readonly responders: readonly ResponderLoad[];
  /** The responder with the highest average per day (then the highest peak day); null when nobody is named. */
  readonly busiest: ResponderLoad | null;
  /** Annunciations of incidents that no tier-0 target hears of (no policy matches). */
  readonly unrouted: number;
  /** Annunciations of incidents only seen in quiet backfill (`live: false`): recorded, nobody told. */
  readonly quiet: number;
  readonly standing: DurationFigure;
  readonly stale: DurationFigure;
  readonly chattering: {
    readonly withinDays: number;
    /** Incidents with at least one chattering annunciation in the period. */
    readonly incidents: number;
    readonly annunciations: number;
    readonly ids: readonly string[];
  };
  readonly badActors: {
    readonly components: readonly { readonly unit: string; readonly component: string; readonly annunciations: number; readonly incidents: number }[];
    /** `measurand`: the finding's subject, a measurand or `sample` (see `subjectOf`). */
    readonly pairs: readonly { readonly rule: RuleFamily; readonly measurand: FindingSubject; readonly incidents: number }[];
    /** Share of all annunciations that the listed components caused; null without annunciations. */
    readonly topComponentsShare: number | null;
  };
}

interface Annunciation {
  readonly incident: FigureIncident;
  readonly t: number;
  readonly chattering: boolean;
}

/**
 * An incident a late or corrected result withdrew: the history no longer produces it, nobody answered it, and it is
 * left out of every figure. An incident a responder's verdict on its sample closed was answered by a person after it
 * was announced and counts like any other; so does a record written before that closure had a kind of its own, closed
 * as withdrawn after a verdict on its opening sample that explains why (sampleVerdict.ts `closingVerdict`).
 */
export function withdrawnByLateResult(incident: Pick<FigureIncident, 'kind' | 'timeline'>): boolean {
  const withdrawn = incident.timeline.find((e) => e.kind === 'closed' && e.how === 'withdrawn');
  if (withdrawn === undefined) return false;
  // The word must come before the closing: a word given to a record already withdrawn explains nothing.
  const word = closingVerdict(incident);
  return word === undefined || Date.parse(word.at) > Date.parse(withdrawn.at);
}

export function alarmFigures(input: AlarmFigureInput): AlarmFigures {
  const { from, to, thresholds } = input;
  if (!(Number.isFinite(from) && Number.isFinite(to) && from <= to)) throw new RangeError(`alarm figures need a period with from ≤ to, got ${from} and ${to}`);
  const incidents = input.incidents.filter((i) => !withdrawnByLateResult(i));
  const inPeriod = (t: number) => t >= from && t <= to;
  const days = (to - from) / DAY_MS;
  const componentYears = input.componentYears ?? null;
  const per100 = (n: number) => (componentYears !== null && componentYears > 0 ? round((100 * n) / componentYears, 4) : null);

  const annunciations = annunciationsOf(incidents, thresholds.chatteringWithinDays * DAY_MS).filter((a) => inPeriod(a.t));
  const opened = incidents.filter((i) => ordered(i).some(({ e, t }) => e.kind === 'opened' && inPeriod(t)));
  const familyCount = new Map<RuleFamily, number>();
  for (const i of opened) for (const f of new Set(raisedPairs(i, -Infinity, to).map((p) => p.rule))) familyCount.set(f, (familyCount.get(f) ?? 0) + 1);
  const byFamily = Object.fromEntries(
    RULE_FAMILIES.map((f) => {
      const n = familyCount.get(f) ?? 0;
      return [f, { incidents: n, per100ComponentYears: per100(n) }];
    }),
  ) as AlarmFigures['byFamily'];

  // Load per responder.
  const heard = new Map<string, number[]>(input.responders.all.map((r) => [r, []]));
  let unrouted = 0;
  let quiet = 0;
  for (const a of annunciations) {
    if (a.incident.live === false) {
      quiet += 1;
      continue;
    }
    const targets = input.responders.of(a.incident, a.t);
    if (targets.length === 0) unrouted += 1;
    for (const r of targets) {
      const times = heard.get(r);
      if (times === undefined) heard.set(r, [a.t]);
      else times.push(a.t);
    }
  }
  const responders = [...heard.entries()]
    .map(([responder, times]) => loadOf(responder, times, days))
    .sort((a, b) => b.annunciations - a.annunciations || compare(a.responder, b.responder));
  const busiest = [...responders].sort((a, b) => b.perDay.average - a.perDay.average || b.perDay.peak - a.perDay.peak || compare(a.responder, b.responder))[0] ?? null;

  // Chattering.
  const chattering = annunciations.filter((a) => a.chattering);
  const chatteringIds = [...new Set(chattering.map((a) => a.incident.id))].sort();

  // Bad actors.
  const byComponent = new Map<string, { unit: string; component: string; annunciations: number; ids: Set<string> }>();
  for (const a of annunciations) {
    const k = `${a.incident.unit}/${a.incident.component}`;
    const c = byComponent.get(k) ?? { unit: a.incident.unit, component: a.incident.component, annunciations: 0, ids: new Set<string>() };
    c.annunciations += 1;
    c.ids.add(a.incident.id);
    byComponent.set(k, c);
  }
  const components = [...byComponent.values()]
    .map((c) => ({ unit: c.unit, component: c.component, annunciations: c.annunciations, incidents: c.ids.size }))
    .sort((a, b) => b.annunciations - a.annunciations || b.incidents - a.incidents || compare(`${a.unit}/${a.component}`, `${b.unit}/${b.component}`))
    .slice(0, thresholds.topBadActors);
  const byPair = new Map<string, { rule: RuleFamily; measurand: FindingSubject; ids: Set<string> }>();
  for (const i of incidents) {
    for (const p of raisedPairs(i, from, to)) {
      const k = `${p.rule}|${p.measurand}`;
      const entry = byPair.get(k) ?? { rule: p.rule, measurand: p.measurand, ids: new Set<string>() };
      entry.ids.add(i.id);
      byPair.set(k, entry);
    }
  }
  const pairs = [...byPair.values()]
    .map((p) => ({ rule: p.rule, measurand: p.measurand, incidents: p.ids.size }))
    .sort((a, b) => b.incidents - a.incidents || compare(`${a.rule}|${a.measurand}`, `${b.rule}|${b.measurand}`))
    .slice(0, thresholds.topBadActors);
  const topTotal = components.reduce((s, c) => s + c.annunciations, 0);

  return {
    period: { from: new Date(from).toISOString(), to: new Date(to).toISOString(), days: round(days, 4) },
    incidents: opened.length,
    per100ComponentYears: per100(opened.length),
    byFamily,
    annunciations: annunciations.length,
    openAtEnd: incidents.filter((i) => isOpenAt(i, to)).length,
    responders,
    busiest,
    unrouted,
    quiet,
    standing: durationFigure(incidents, (i) => standingIntervals(i, thresholds.standingAfterDays * DAY_MS), thresholds.standingAfterDays, from, to),
    stale: durationFigure(incidents.filter((i) => i.live !== false), (i) => staleIntervals(i, thresholds.staleAfterDays * DAY_MS), thresholds.staleAfterDays, from, to),
    chattering: { withinDays: thresholds.chatteringWithinDays, incidents: chatteringIds.length, annunciations: chattering.length, ids: chatteringIds },
    badActors: { components, pairs, topComponentsShare: annunciations.length === 0 ? null : round(topTotal / annunciations.length, 4) },
  };
}

/** Component-years for a period in which `components` components were watched throughout. */
export function componentYearsOf(components: number, from: number, to: number): number {
  return (components * Math.max(0, to - from)) / YEAR_MS;
}

type Timed = ReadonlyArray<{ readonly e: TimelineEntry; readonly t: number }>;

/** Timelines in time order, parsed once per incident object (the figures walk each timeline several times). */
const ORDERED = new WeakMap<FigureIncident, Timed>();

/** The timeline in time order (stable, so that entries of one sample keep their order). */
function ordered(i: FigureIncident): Timed {
  let known = ORDERED.get(i);
  if (known === undefined) {
    known = i.timeline.map((e, n) => ({ e, t: Date.parse(e.at), n })).sort((a, b) => a.t - b.t || a.n - b.n);
    ORDERED.set(i, known);
  }
  return known;
}

/** Every annunciation of every incident, with whether it chatters (came within `window` of the last return to normal). */
function annunciationsOf(incidents: readonly FigureIncident[], window: number): Annunciation[] {
  const out: Annunciation[] = [];
  const byKey = new Map<string, FigureIncident[]>();
  for (const i of incidents) {
    const list = byKey.get(i.key);
    if (list === undefined) byKey.set(i.key, [i]);
    else list.push(i);
  }
  for (const list of byKey.values()) {
    const sorted = list.map((i) => ({ i, opened: openedAt(i) })).sort((a, b) => a.opened - b.opened || compare(a.i.id, b.i.id));
    let previousEnd: number | null = null;
    for (const { i } of sorted) {
      let active = false;
      let lastEnd: number | null = null;
      for (const { e, t } of ordered(i)) {
        if (e.kind === 'opened') {
          out.push({ incident: i, t, chattering: previousEnd !== null && t - previousEnd <= window });
          active = true;
        } else if (e.kind === 'active-again') {
          out.push({ incident: i, t, chattering: lastEnd !== null && t - lastEnd <= window });
          active = true;
        } else if ((e.kind === 'returned' || e.kind === 'closed') && active) {
          active = false;
          lastEnd = t;
        }
      }
      previousEnd = active ? null : lastEnd;
    }
  }
  return out;
}

function openedAt(i: FigureIncident): number {
  return ordered(i).find((x) => x.e.kind === 'opened')?.t ?? Number.POSITIVE_INFINITY;
}

function isOpenAt(i: FigureIncident, t: number): boolean {
  let open = false;
  for (const { e, t: at } of ordered(i)) {
    if (at > t) break;
    if (e.kind === 'opened' || (e.kind === 'active-again' && e.reopened)) open = true;
    else if (e.kind === 'closed') open = false;
  }
  return open;
}

/** Rule/measurand pairs the incident raised (or changed the severity of) between `from` and `to`. */
function raisedPairs(i: FigureIncident, from: number, to: number): Array<{ rule: RuleFamily; measurand: FindingSubject }> {
  const seen = new Map<string, { rule: RuleFamily; measurand: FindingSubject }>();
  for (const { e, t } of ordered(i)) {
    if (e.kind !== 'finding' || e.change === 'cleared') continue;
    if (t < from || t > to) continue;
    // An entry recorded before timeline entries kept their check has only its measurand to go by.
    const subject = subjectOf(e);
    seen.set(`${e.rule}|${subject}`, { rule: e.rule, measurand: subject });
  }
  return [...seen.values()];
}

type Interval = readonly [number, number];

/** Times the incident is standing: from `after` into each active stretch until that stretch ends. */
function standingIntervals(i: FigureIncident, after: number): Interval[] {
  const out: Interval[] = [];
  let since: number | null = null;
  for (const { e, t } of ordered(i)) {
    if ((e.kind === 'opened' || e.kind === 'active-again') && since === null) since = t;
    else if ((e.kind === 'returned' || e.kind === 'closed') && since !== null) {
      if (t - since > after) out.push([since + after, t]);
      since = null;
    }
  }
  if (since !== null) out.push([since + after, Number.POSITIVE_INFINITY]);
  return out;
}

/** Times the incident is stale: from `after` into each stretch in which it is open, unacknowledged and not shelved. */
function staleIntervals(i: FigureIncident, after: number): Interval[] {
  const out: Interval[] = [];
  let open = false;
  let acknowledged = false;
  let shelvedUntil: number | null = null;
  let since: number | null = null;
  const settle = (t: number) => {
    const waiting = open && !acknowledged && shelvedUntil === null;
    if (waiting && since === null) since = t;
    if (!waiting && since !== null) {
      if (t - since > after) out.push([since + after, t]);
      since = null;
    }
  };
  for (const { e, t } of ordered(i)) {
    if (shelvedUntil !== null && shelvedUntil <= t) {
      const until: number = shelvedUntil;
      shelvedUntil = null;
      settle(until);
    }
    switch (e.kind) {
      case 'opened':
        open = true;
        acknowledged = false;
        break;
      case 'active-again':
        open = true;
        break;
      case 'acknowledged':
        acknowledged = true;
        break;
      case 'unacknowledged':
        acknowledged = false;
        break;
      case 'shelved':
        shelvedUntil = Date.parse(e.until);
        break;
      case 'unshelved':
        shelvedUntil = null;
        break;
      case 'closed':
        open = false;
        shelvedUntil = null;
        break;
      default:
        break;
    }
    settle(t);
  }
  if (shelvedUntil !== null) {
    const until: number = shelvedUntil;
    shelvedUntil = null;
    settle(until);
  }
  if (since !== null) out.push([since + after, Number.POSITIVE_INFINITY]);
  return out;
}

function durationFigure(incidents: readonly FigureIncident[], intervalsOf: (i: FigureIncident) => Interval[], afterDays: number, from: number, to: number): DurationFigure {
  const events: Array<{ t: number; d: number }> = [];
  const ever = new Set<string>();
  const atEnd: string[] = [];
  for (const i of incidents) {
    for (const [a, b] of intervalsOf(i)) {
      if (a > to || b <= from) continue;
      ever.add(i.id);
      if (b > to) atEnd.push(i.id);
      events.push({ t: Math.max(a, from), d: 1 });
      if (b <= to) events.push({ t: b, d: -1 });
    }
  }
  // Half-open intervals: an end and a start at the same moment do not overlap.
  events.sort((x, y) => x.t - y.t || x.d - y.d);
  let count = 0;
  let peak = 0;
  let peakAt: number | null = null;
  for (const ev of events) {
    count += ev.d;
    if (count > peak) {
      peak = count;
      peakAt = ev.t;
    }
  }
  return { afterDays, atEnd: new Set(atEnd).size, peak, peakAt: peakAt === null ? null : new Date(peakAt).toISOString(), incidents: ever.size, ids: [...new Set(atEnd)].sort() };
}

function loadOf(responder: string, times: readonly number[], days: number): ResponderLoad {
  return {
    responder,
    annunciations: times.length,
    perDay: rateOf(times, (t) => Math.floor(t / DAY_MS), Math.max(days, 1)),
    perWeek: rateOf(times, weekOf, Math.max(days / 7, 1)),
  };
}

function rateOf(times: readonly number[], bucketOf: (t: number) => number, periods: number): Rate {
  const counts = new Map<number, number>();
  for (const t of times) counts.set(bucketOf(t), (counts.get(bucketOf(t)) ?? 0) + 1);
  let peak = 0;
  let peakBucket: number | null = null;
  for (const [bucket, n] of [...counts.entries()].sort((a, b) => a[0] - b[0])) {
    if (n > peak) {
      peak = n;
      peakBucket = bucket;
    }
  }
  return { average: round(times.length / periods, 4), peak, peakAt: peakBucket === null ? null : new Date(peakBucket * DAY_MS).toISOString().slice(0, 10) };
}

/** The day number (days since the epoch) of the Monday that starts the UTC week of `t`; 1970-01-01 was a Thursday. */
function weekOf(t: number): number {
  const day = Math.floor(t / DAY_MS);
  return day - ((((day + 3) % 7) + 7) % 7);
}

function compare(a: string, b: string): number {
  return a < b ? -1 : a > b ? 1 : 0;
}

function round(x: number, digits: number): number {
  const f = 10 ** digits;
  return Math.round(x * f) / f;
}
