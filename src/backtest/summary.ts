/**
 * The backtest's fleet summary, pure: incidents per rule family and per 100 component-years, and for every incident
 * (an episode, as the incident engine delimits it) which families caught it and how much earlier the change detectors
 * spoke than the fixed limit and than the classic families.
 *
 * Conventions:
 * - change detectors are `ewma` and `cusum`, counted on rises only: a fall in wear rate points at a sampling fault,
 *   not at wear, so it is no early warning of the damage the limit would later show;
 * - classic families are `limit` (fixed), `rate` and `population`; `condition` and `cleanliness` count for neither side;
 * - a lead is counted in samples of the component (from the detector's sample up to, not including, the limit's), in
 *   operating hours (unit-hours meter; null when a sample has none) and in calendar days; negative when the limit came first;
 * - the exposure is counted in component-years: each component from its first to its last sample, in years of
 *   365.25 days, summed over the components (a component with a single sample adds none, though its incidents
 *   count); a rate per 100 component-years is given only from MIN_COMPONENT_YEARS of exposure on, since below it one
 *   incident more or less moves the rate by more than 100 and a history of hours would give rates in the hundreds of
 *   thousands (null otherwise, beside the exposure);
 * - every result is taken as arriving live at its sampling time (run.ts), so no incident is quiet backfill;
 * - the alarm-management key figures (incidents/alarmFigures.ts) run over the fleet's span, from its first to its last
 *   sample; nobody acknowledges in a backtest, so `stale` counts what would go stale if nobody answered, and
 *   `escalation` lists who of the later escalation tiers would be told if nobody answered (the load per responder
 *   counts tier 0: responders.ts).
 */
import type { Sample } from '../domain/event.ts';
import { RULE_FAMILIES, SEVERITIES, type IncidentKind, type RuleFamily, type Severity } from '../domain/finding.ts';
import type { Measurand } from '../domain/measurands.ts';
import { ADVISORY_CAUTION } from '../domain/caution.ts';
import { alarmFigures, type AlarmFigures, type FigureIncident, type FigureThresholds, type ResponderMap } from '../incidents/alarmFigures.ts';
import type { AnnunciationReach } from '../incidents/responders.ts';
import type { TimelineEntry } from '../incidents/model.ts';
import type { BudgetText, DetectorParameters } from './parameters.ts';

export const CHANGE_FAMILIES: readonly RuleFamily[] = ['ewma', 'cusum'];
export const CLASSIC_FAMILIES: readonly RuleFamily[] = ['limit', 'rate', 'population'];

const YEAR_MS = 365.25 * 86_400_000;
const DAY_MS = 86_400_000;

/** The least exposure, in component-years, from which rates per 100 component-years are given. */
export const MIN_COMPONENT_YEARS = 1;

export interface Firing {
  readonly rule: RuleFamily;
  readonly measurand: Measurand;
  readonly severity: Severity;
  readonly direction?: 'up' | 'down';
  readonly sampleId: string;
  readonly sampledAt: string;
  /** Position of the sample in the component's history, from 0. */
  readonly sampleIndex: number;
  readonly unitHours: number | null;
}

export interface Lead {
  readonly samples: number;
  readonly hours: number | null;
  readonly days: number;
}

export type CaughtBy = 'both' | 'change-only' | 'classic-only' | 'neither';

export interface EpisodeSummary {
  readonly incidentId: string;
  readonly unit: string;
  readonly component: string;
  readonly measurand: Measurand | null;
  readonly openedAt: string;
  readonly lastSampledAt: string;
  readonly peakSeverity: Severity;
  readonly state: string;
  /** Every family that raised a finding in the incident, in the order of RULE_FAMILIES. */
  readonly families: readonly RuleFamily[];
  /** The first raise of each family (and direction), in sample order. */
  readonly firsts: readonly Firing[];
  readonly changeFirst: Firing | null;
  readonly limitFirst: Firing | null;
  readonly classicFirst: Firing | null;
  readonly caughtBy: CaughtBy;
  /** How much earlier the first rise of EWMA/CUSUM came than the fixed limit; null unless both fired. */
  readonly leadVsLimit: Lead | null;
  /** The same against the first of limit, rate and population. */
  readonly leadVsClassic: Lead | null;
}

export interface Earliness {
  readonly against: 'limit' | 'classic';
  /** Episodes where both EWMA/CUSUM and the comparison caught it. */
  readonly episodes: number;
  readonly medianSamples: number | null;
  readonly medianHours: number | null;
  readonly medianDays: number | null;
  readonly earlier: number;
  readonly same: number;
  readonly later: number;
  readonly list: readonly ({ readonly incidentId: string } & Lead)[];
}

export interface RunSummary {
  readonly label: string;
  readonly configFile: string | null;
  readonly budget: BudgetText | null;
  readonly parameters: readonly DetectorParameters[];
  readonly incidents: {
    readonly total: number;
    /** Null when the exposure is below `minComponentYears` (too short for a rate) or nil. */
    readonly per100ComponentYears: number | null;
    /** The exposure the rates are taken over (the fleet's component-years), and the least from which they are given. */
    readonly componentYears: number;
    readonly minComponentYears: number;
    readonly bySeverity: Readonly<Record<Severity, number>>;
    readonly byFamily: Readonly<Record<RuleFamily, { readonly incidents: number; readonly per100ComponentYears: number | null }>>;
  };
  /** Samples on which each family fired, as judged on arrival. */
  readonly samplesFlagged: Readonly<Record<RuleFamily, number>>;
  readonly episodes: readonly EpisodeSummary[];
  readonly earliness: { readonly vsLimit: Earliness; readonly vsClassic: Earliness };
  /** Incident ids caught by one side only, or by neither (oil condition, cleanliness, a fall only). */
  readonly oneSided: { readonly changeOnly: readonly string[]; readonly classicOnly: readonly string[]; readonly neither: readonly string[] };
  /** The alarm-management key figures (ISA-18.2 / IEC 62682, EEMUA 191) over the fleet's span. */
  readonly alarmFigures: AlarmFigures;
  /** Who of the escalation tiers after the first would be told if nobody acknowledged. */
  readonly escalation: EscalationIfUnanswered;
}

/**
 * The later tiers of the escalation policies as a backtest, in which nobody acknowledges, would reach them: a tier is
 * told of an annunciation when its delay after its chain's start passes before the incident returns to normal. The
 * load per responder (alarmFigures.responders) counts tier 0 only; a target counted here for an annunciation is not
 * also tier 0 of it.
 */
export interface EscalationIfUnanswered {
  /** Annunciations in the period that would go beyond tier 0. */
  readonly annunciations: number;
  /** Every target of a later tier, with the annunciations it would hear of that way, most first. */
  readonly responders: readonly { readonly responder: string; readonly annunciations: number }[];
}

export interface ComponentSpan {
  readonly unit: string;
  readonly component: string;
  readonly group: string;
  readonly samples: number;
  readonly from: string | null;
  readonly to: string | null;
  readonly years: number;
}

export interface ComparisonRow {
  readonly metric: string;
  readonly values: readonly (number | string | null)[];
  readonly differs: boolean;
}

export interface BacktestSummary {
  readonly kind: 'wearshift.backtest';
  /** The tool advises; people decide (the caution that goes with every finding). */
  readonly advisory: string;
  readonly file: string;
  readonly records: number;
  readonly rejected: number;
  /**
   * With a file of responders' words (--sample-verdicts): how many words it holds, and per configuration how many of
   * them its run refused (a sample that does not take the word under that configuration, or not in the history).
   * Null without one: nobody's word is in the backtest.
   */
  readonly sampleVerdicts: { readonly words: number; readonly refused: readonly number[] } | null;
  readonly fleet: { readonly components: number; readonly samples: number; readonly componentYears: number; readonly from: string | null; readonly to: string | null };
  readonly components: readonly ComponentSpan[];
  readonly runs: readonly RunSummary[];
  /** With two configurations: the headline numbers side by side, rows that differ marked. */
  readonly comparison: readonly ComparisonRow[] | null;
}

/** One incident as the pipeline reported it: its timeline entries and the state it ended in. */
export interface IncidentRecord {
  readonly id: string;
  /** `unit/component[/measurand|/sampling]`: at most one incident per key is open. */
  readonly key: string;
  readonly unit: string;
  readonly component: string;
  readonly group: string;
  readonly kind: IncidentKind;
  /** Set when incidents are kept per measurand (incidents.scope: measurand). */
  readonly measurand: Measurand | null;
  readonly openedAt: string;
  readonly lastSampledAt: string;
  readonly peakSeverity: Severity;
  /** In the standards' words: active, returned, acknowledged, closed … */
  readonly state: string;
  readonly entries: readonly TimelineEntry[];
}

/** What the summary needs of one component of one run. */
export interface ComponentOutcome {
  readonly unit: string;
  readonly component: string;
  readonly group: string;
  readonly samples: readonly Sample[];
  readonly findingsBySample: ReadonlyMap<string, readonly { readonly rule: RuleFamily }[]>;
  readonly incidents: readonly IncidentRecord[];
}

export interface RunInput {
  readonly label: string;
  readonly configFile: string | null;
  readonly budget: BudgetText | null;
  readonly parameters: readonly DetectorParameters[];
  readonly components: readonly ComponentOutcome[];
  /**
   * Thresholds (config `alarmFigures`), who hears of what (tier 0 of the escalation policies), and who of the later
   * tiers would be told of each annunciation if nobody acknowledged.
   */
  readonly alarm: {
    readonly thresholds: FigureThresholds;
    readonly responders: ResponderMap;
    readonly escalation?: { readonly targets: readonly string[]; readonly reach: (i: FigureIncident) => readonly AnnunciationReach[] };
  };
}

export interface SummaryInput {
  readonly file: string;
  readonly records: number;
  readonly rejected: number;
  readonly sampleVerdicts?: BacktestSummary['sampleVerdicts'];
  readonly runs: readonly RunInput[];
}

export function buildBacktestSummary(input: SummaryInput): BacktestSummary {
  const first = input.runs[0];
  if (first === undefined) throw new RangeError('a backtest summary needs at least one run');
  const components = first.components.map(spanOf);
  const componentYears = components.reduce((sum, c) => sum + c.years, 0);
  const times = components.flatMap((c) => (c.from === null || c.to === null ? [] : [c.from, c.to])).sort();
  const span = times.length === 0 ? null : { from: Date.parse(times[0]!), to: Date.parse(times.at(-1)!) };
  const runs = input.runs.map((r) => runSummary(r, componentYears, span));
  return {
    kind: 'wearshift.backtest',
    advisory: ADVISORY_CAUTION,
    file: input.file,
    records: input.records,
    rejected: input.rejected,
    sampleVerdicts: input.sampleVerdicts ?? null,
    fleet: {
      components: components.length,
      samples: components.reduce((sum, c) => sum + c.samples, 0),
      componentYears: round(componentYears, 4),
      from: times[0] ?? null,
      to: times.at(-1) ?? null,
    },
    components,
    runs,
    comparison: runs.length > 1 ? comparisonRows(runs) : null,
  };
}

function spanOf(c: ComponentOutcome): ComponentSpan {
  const from = c.samples[0]?.sampledAt ?? null;
  const to = c.samples.at(-1)?.sampledAt ?? null;
  const years = from === null || to === null ? 0 : (Date.parse(to) - Date.parse(from)) / YEAR_MS;
  return { unit: c.unit, component: c.component, group: c.group, samples: c.samples.length, from, to, years: round(years, 4) };
}

function runSummary(run: RunInput, componentYears: number, span: { from: number; to: number } | null): RunSummary {
  const episodes = run.components.flatMap((c) => c.incidents.map((i) => episodeOf(c, i))).sort((a, b) => (a.openedAt < b.openedAt ? -1 : a.openedAt > b.openedAt ? 1 : a.incidentId < b.incidentId ? -1 : 1));
  const exposed = componentYears >= MIN_COMPONENT_YEARS;
  const per100 = (n: number) => (exposed ? round((100 * n) / componentYears, 4) : null);
  const byFamily = Object.fromEntries(
    RULE_FAMILIES.map((f) => {
      const n = episodes.filter((e) => e.families.includes(f)).length;
      return [f, { incidents: n, per100ComponentYears: per100(n) }];
    }),
  ) as RunSummary['incidents']['byFamily'];
  const bySeverity = Object.fromEntries(SEVERITIES.map((s) => [s, episodes.filter((e) => e.peakSeverity === s).length])) as Record<Severity, number>;
  const samplesFlagged = Object.fromEntries(RULE_FAMILIES.map((f) => [f, 0])) as Record<RuleFamily, number>;
  for (const c of run.components) {
    for (const findings of c.findingsBySample.values()) {
      for (const f of new Set(findings.map((x) => x.rule))) samplesFlagged[f] += 1;
    }
  }
  const ids = (by: CaughtBy) => episodes.filter((e) => e.caughtBy === by).map((e) => e.incidentId);
  const incidents: FigureIncident[] = run.components.flatMap((c) => c.incidents.map((i) => ({ ...i, timeline: i.entries })));
  const from = span?.from ?? 0;
  const to = span?.to ?? 0;
  return {
    label: run.label,
    configFile: run.configFile,
    budget: run.budget,
    parameters: run.parameters,
    incidents: {
      total: episodes.length,
      per100ComponentYears: per100(episodes.length),
      componentYears: round(componentYears, 4),
      minComponentYears: MIN_COMPONENT_YEARS,
      bySeverity,
      byFamily,
    },
    samplesFlagged,
    episodes,
    earliness: { vsLimit: earliness(episodes, 'limit'), vsClassic: earliness(episodes, 'classic') },
    oneSided: { changeOnly: ids('change-only'), classicOnly: ids('classic-only'), neither: ids('neither') },
    alarmFigures: alarmFigures({
      incidents,
      from,
      to,
      thresholds: run.alarm.thresholds,
      responders: run.alarm.responders,
      componentYears: exposed ? componentYears : null,
    }),
    escalation: escalationIfUnanswered(incidents, run.alarm.escalation, from, to),
  };
}

function escalationIfUnanswered(incidents: readonly FigureIncident[], escalation: RunInput['alarm']['escalation'], from: number, to: number): EscalationIfUnanswered {
  const counts = new Map((escalation?.targets ?? []).map((t) => [t, 0]));
  let annunciations = 0;
  if (escalation !== undefined) {
    for (const i of incidents) {
      for (const r of escalation.reach(i)) {
        if (r.t < from || r.t > to || r.unanswered.length === 0) continue;
        annunciations += 1;
        for (const t of r.unanswered) counts.set(t, (counts.get(t) ?? 0) + 1);
      }
    }
  }
  const responders = [...counts.entries()].map(([responder, n]) => ({ responder, annunciations: n })).sort((a, b) => b.annunciations - a.annunciations || (a.responder < b.responder ? -1 : 1));
  return { annunciations, responders };
}

function episodeOf(c: ComponentOutcome, incident: IncidentRecord): EpisodeSummary {
  const position = new Map(c.samples.map((s, i) => [s.sampleId, { index: i, unitHours: s.unitHours ?? null }]));
  const firsts = new Map<string, Firing>();
  for (const entry of incident.entries) {
    if (entry.kind !== 'finding' || entry.change === 'cleared') continue;
    const key = `${entry.rule}${entry.direction === 'down' ? ':down' : ''}`;
    const at = position.get(entry.sampleId);
    const sampleIndex = at?.index ?? -1;
    const known = firsts.get(key);
    if (known !== undefined && known.sampleIndex <= sampleIndex) continue;
    firsts.set(key, {
      rule: entry.rule,
      measurand: entry.measurand,
      severity: entry.severity,
      ...(entry.direction !== undefined && { direction: entry.direction }),
      sampleId: entry.sampleId,
      sampledAt: entry.at,
      sampleIndex,
      unitHours: at?.unitHours ?? null,
    });
  }
  const ordered = [...firsts.values()].sort((a, b) => a.sampleIndex - b.sampleIndex || RULE_FAMILIES.indexOf(a.rule) - RULE_FAMILIES.indexOf(b.rule));
  const earliest = (families: readonly RuleFamily[], rising: boolean) => ordered.find((f) => families.includes(f.rule) && (!rising || f.direction !== 'down')) ?? null;
  const changeFirst = earliest(CHANGE_FAMILIES, true);
  const limitFirst = earliest(['limit'], false);
  const classicFirst = earliest(CLASSIC_FAMILIES, false);
  const caughtBy: CaughtBy = changeFirst && classicFirst ? 'both' : changeFirst ? 'change-only' : classicFirst ? 'classic-only' : 'neither';
  return {
    incidentId: incident.id,
    unit: incident.unit,
    component: incident.component,
    measurand: incident.measurand,
    openedAt: incident.openedAt,
    lastSampledAt: incident.lastSampledAt,
    peakSeverity: incident.peakSeverity,
    state: incident.state,
    families: RULE_FAMILIES.filter((f) => ordered.some((x) => x.rule === f)),
    firsts: ordered,
    changeFirst,
    limitFirst,
    classicFirst,
    caughtBy,
    leadVsLimit: leadOf(changeFirst, limitFirst),
    leadVsClassic: leadOf(changeFirst, classicFirst),
  };
}

function leadOf(early: Firing | null, late: Firing | null): Lead | null {
  if (early === null || late === null) return null;
  return {
    samples: late.sampleIndex - early.sampleIndex,
    hours: early.unitHours === null || late.unitHours === null ? null : late.unitHours - early.unitHours,
    days: round((Date.parse(late.sampledAt) - Date.parse(early.sampledAt)) / DAY_MS, 3),
  };
}

function earliness(episodes: readonly EpisodeSummary[], against: 'limit' | 'classic'): Earliness {
  const list = episodes.flatMap((e) => {
    const lead = against === 'limit' ? e.leadVsLimit : e.leadVsClassic;
    return lead === null ? [] : [{ incidentId: e.incidentId, ...lead }];
  });
  const hours = list.flatMap((l) => (l.hours === null ? [] : [l.hours]));
  return {
    against,
    episodes: list.length,
    medianSamples: median(list.map((l) => l.samples)),
    medianHours: median(hours),
    medianDays: median(list.map((l) => l.days)),
    earlier: list.filter((l) => l.samples > 0).length,
    same: list.filter((l) => l.samples === 0).length,
    later: list.filter((l) => l.samples < 0).length,
    list,
  };
}

export function median(values: readonly number[]): number | null {
  if (values.length === 0) return null;
  const s = [...values].sort((a, b) => a - b);
  const mid = Math.floor(s.length / 2);
  return s.length % 2 === 1 ? s[mid]! : round((s[mid - 1]! + s[mid]!) / 2, 6);
}

function comparisonRows(runs: readonly RunSummary[]): ComparisonRow[] {
  const row = (metric: string, pick: (r: RunSummary) => number | string | null): ComparisonRow => {
    const values = runs.map(pick);
    return { metric, values, differs: values.some((v) => v !== values[0]) };
  };
  const design = (r: RunSummary, what: 'h' | 'L' | 'arl0') =>
    r.parameters.map((p) => (what === 'h' ? (p.cusum.enabled ? p.cusum.h : '-') : what === 'L' ? (p.ewma.enabled ? p.ewma.L : '-') : p.arl0)).map(String).join(' / ');
  return [
    row('per-chart ARL0', (r) => design(r, 'arl0')),
    row('CUSUM h', (r) => design(r, 'h')),
    row('EWMA L', (r) => design(r, 'L')),
    row('incidents', (r) => r.incidents.total),
    row('incidents per 100 component-years', (r) => r.incidents.per100ComponentYears),
    ...RULE_FAMILIES.map((f) => row(`incidents with ${f}`, (r) => r.incidents.byFamily[f].incidents)),
    row('caught by both sides', (r) => r.earliness.vsClassic.episodes),
    row('median lead over the fixed limit, samples', (r) => r.earliness.vsLimit.medianSamples),
    row('median lead over the fixed limit, operating hours', (r) => r.earliness.vsLimit.medianHours),
    row('median lead over classic rules, samples', (r) => r.earliness.vsClassic.medianSamples),
    row('median lead over classic rules, operating hours', (r) => r.earliness.vsClassic.medianHours),
    row('caught by EWMA/CUSUM only', (r) => r.oneSided.changeOnly.length),
    row('caught by classic rules only', (r) => r.oneSided.classicOnly.length),
    row('busiest responder, incidents per day (average)', (r) => r.alarmFigures.busiest?.perDay.average ?? null),
    row('busiest responder, incidents per week (peak)', (r) => r.alarmFigures.busiest?.perWeek.peak ?? null),
    row('standing incidents at most at once', (r) => r.alarmFigures.standing.peak),
    row('stale incidents at most at once (nobody acknowledges)', (r) => r.alarmFigures.stale.peak),
    row('chattering incidents', (r) => r.alarmFigures.chattering.incidents),
    row('annunciations beyond tier 0 if nobody acknowledges', (r) => r.escalation.annunciations),
  ];
}

function round(x: number, digits: number): number {
  const f = 10 ** digits;
  return Math.round(x * f) / f;
}
