/**
 * The verdict: what the incidents of a component are, as a fold over its evaluation steps in history order and the
 * operators' actions placed after the step that was the latest when each was taken. It depends on nothing else —
 * no clock, no notification state — so the live worker, replay, backtest and a history folded again after a late
 * result reach the same incidents. (What was told to whom is the annunciation's business: annunciate.ts.)
 *
 * A step with findings that ask for an incident opens or updates the incident of its key (one per unit/component,
 * or per measurand; sampling findings have their own key); consecutive clean steps return it to normal; a finding
 * soon after the return reopens it rather than opening a new one. New evidence beyond what was acknowledged (a
 * higher severity, a new measurand) withdraws the acknowledgement: it needs a fresh look (ISA-18.2 practice); so does
 * a reopening, live or in backfill: the closed alarm's acknowledgement does not cover the new situation.
 */
import { InputError } from '../domain/errors.ts';
import { findingKey, incidentKindOf, joinedWords, maxSeverity, type Finding, type IncidentKind, type Severity } from '../domain/finding.ts';
import type { Measurand } from '../domain/measurands.ts';
import type { DraftIncident, DraftState } from './draft.ts';
import { IncidentConflictError, IncidentNotFoundError } from './errors.ts';
import { lastWordOn, type Closure, type RecordedAction, type StepPosition, type TimelineEntry } from './model.ts';
import type { IncidentRules } from './policy.ts';
import type { ComponentForecast, LimitForecast } from '../analysis/forecast/model.ts';
import { compareOrder } from '../analysis/fold/analysisFold.ts';

/** A step as the verdict judges it. */
export interface VerdictStep {
  readonly sampleId: string;
  readonly sampledAt: string;
  readonly time: number;
  readonly unitHours?: number;
  readonly findings: readonly Finding[];
  /** The component's time-to-limit forecasts after this step (analysis/forecast); absent when not made. */
  readonly forecast?: ComponentForecast;
  /**
   * The sample is in doubt: its findings other than alarms were held back, so it does not count as a clean sample of
   * a machine incident (a bottle of new oil must not bring an incident back to normal).
   */
  readonly inDoubt?: boolean;
}

export interface StepOptions {
  /** The sample arrived as backfill: recorded in full, nobody is asked to act on it. */
  readonly quiet: boolean;
  /** The component's group at this step. */
  readonly group: string;
}

/** The longest timeline kept per incident: its first entry and the latest ones. */
export const TIMELINE_LIMIT = 200;

export function positionOf(step: Pick<VerdictStep, 'sampleId' | 'time' | 'unitHours'>): StepPosition {
  return { sampleId: step.sampleId, time: step.time, ...(step.unitHours !== undefined && { unitHours: step.unitHours }) };
}

/** Compares positions as the history orders samples (the analysis core's order: time, unit hours, sampleId). */
export function comparePosition(a: StepPosition, b: StepPosition): number {
  return compareOrder(a, b);
}

/** Judges one step; a step at or before the last one judged is skipped (a redelivery). Returns false when skipped. */
export function judgeStep(draft: DraftState, step: VerdictStep, options: StepOptions, rules: IncidentRules): boolean {
  if (Number.isNaN(step.time)) throw new InputError(`step of sample "${step.sampleId}": sampledAt "${step.sampledAt}" is not a date-time`);
  const misplaced = step.findings.find((f) => f.unit !== draft.unit || f.component !== draft.component);
  if (misplaced !== undefined) {
    throw new InputError(`step of sample "${step.sampleId}": a finding of ${misplaced.unit}/${misplaced.component} cannot go to ${draft.unit}/${draft.component}`);
  }
  const position = positionOf(step);
  if (draft.judged !== null && comparePosition(position, draft.judged) <= 0) return false;
  const byKey = new Map<string, Finding[]>();
  for (const f of step.findings) {
    if (f.disposition !== 'incident') continue;
    const key = keyOf(draft.unit, draft.component, f, rules.incidents.scope);
    byKey.set(key, [...(byKey.get(key) ?? []), f]);
  }
  const keys = [...new Set([...Object.keys(draft.incidents), ...byKey.keys()])].sort();
  for (const key of keys) {
    const findings = byKey.get(key);
    const existing = draft.incidents[key];
    if (findings !== undefined) {
      const kind = incidentKindOf(findings[0]!);
      const context = step.findings.filter((f) => f.disposition !== 'incident' && incidentKindOf(f) === kind);
      draft.incidents[key] = withFindings(draft, key, existing, findings, context, step, options, rules);
    } else if (existing !== undefined && !(step.inDoubt === true && existing.kind === 'machine')) {
      cleanStep(existing, step, options, rules);
    }
  }
  draft.judged = position;
  return true;
}

export function keyOf(unit: string, component: string, f: Finding, scope: IncidentRules['incidents']['scope']): string {
  if (incidentKindOf(f) === 'sampling') return `${unit}/${component}/sampling`;
  return scope === 'measurand' ? `${unit}/${component}/${f.measurand}` : `${unit}/${component}`;
}

function highest(findings: readonly Finding[]): Severity {
  return findings.map((f) => f.severity).reduce(maxSeverity);
}

function measurandsOf(findings: readonly Finding[]): Measurand[] {
  return [...new Set(findings.map((f) => f.measurand))].sort();
}

/** Why a reopening withdraws the acknowledgement, in the timeline and in the message that tells it. */
export const REOPENED = 'reopened after it had been closed';

function withFindings(
  draft: DraftState,
  key: string,
  existing: DraftIncident | undefined,
  findings: Finding[],
  context: Finding[],
  step: VerdictStep,
  options: StepOptions,
  rules: IncidentRules,
): DraftIncident {
  const window = rules.incidents.reopenWithinSamples;
  let inc = existing;
  if (inc === undefined || (inc.closed !== null && (inc.stepsSinceEnd ?? 0) >= window)) {
    if (inc !== undefined) (draft.replaced ??= []).push(inc);
    const measurand = rules.incidents.scope === 'measurand' && incidentKindOf(findings[0]!) === 'machine' ? findings[0]!.measurand : undefined;
    inc = openIncident(draft, key, incidentKindOf(findings[0]!), findings, step, options, measurand);
  } else if (inc.closed !== null) {
    inc.closed = null;
    inc.alarm = 'active';
    inc.stepsSinceEnd = null;
    push(inc, { kind: 'active-again', at: step.sampledAt, sampleId: step.sampleId, reopened: true });
    // A closed alarm that comes back is a new alarm situation (ISA-18.2): the acknowledgement of the old one does
    // not cover it.
    if (inc.acknowledged !== null) {
      inc.acknowledged = null;
      push(inc, { kind: 'unacknowledged', at: step.sampledAt, reason: REOPENED });
    }
  } else if (inc.alarm === 'returned') {
    inc.alarm = 'active';
    inc.stepsSinceEnd = null;
    push(inc, { kind: 'active-again', at: step.sampledAt, sampleId: step.sampleId, reopened: false });
  }
  recordFindingChanges(inc, findings, step);
  inc.group = options.group;
  inc.activeFindings = findings;
  inc.evidence = findings;
  inc.context = context;
  // A sampling incident is about the samples, not the machine: no time to limit.
  const forecast = inc.kind === 'machine' ? forecastOf(step.forecast, findings) : undefined;
  if (forecast !== undefined) inc.forecast = forecast;
  else delete inc.forecast;
  inc.severity = highest(findings);
  inc.peakSeverity = maxSeverity(inc.peakSeverity, inc.severity);
  inc.cleanSteps = 0;
  inc.lastSampleId = step.sampleId;
  inc.lastSampledAt = step.sampledAt;
  inc.lastLive = !options.quiet;
  inc.live ||= !options.quiet;
  const ack = inc.acknowledged;
  if (ack !== null && !options.quiet) {
    const reasons: string[] = [];
    const severityNow = inc.severity;
    if (severityNow !== ack.severity && maxSeverity(severityNow, ack.severity) === severityNow) reasons.push(`severity rose from ${ack.severity} to ${severityNow}`);
    const joined = measurandsOf(findings).filter((m) => !ack.measurands.includes(m));
    if (joined.length > 0) reasons.push(`${joinedWords(findings, joined)} joined`);
    if (reasons.length > 0) {
      inc.acknowledged = null;
      push(inc, { kind: 'unacknowledged', at: step.sampledAt, reason: `new evidence: ${reasons.join('; ')}` });
    }
  }
  return inc;
}

/**
 * The forecasts an incident carries: those of its evidence's measurands, not the levels already crossed (the
 * findings say so), and one "not enough history" line per measurand rather than one per level, about the first level
 * still ahead — none once a reading is past an alarm level (a reading far above its alarm level needs no line saying
 * when it might get there, nor when it might fall to the level on the other side).
 */
function forecastOf(forecast: ComponentForecast | undefined, findings: readonly Finding[]): LimitForecast[] | undefined {
  if (forecast === undefined) return undefined;
  const out: LimitForecast[] = [];
  for (const m of measurandsOf(findings)) {
    const limits = forecast.measurands.find((x) => x.measurand === m)?.limits ?? [];
    const unknown = limits.filter((l) => l.outcome === 'not-enough-history');
    if (unknown.length > 0) {
      const ahead = unknown.some((l) => l.severity === 'alarm' && readingPast(l, findings)) ? undefined : unknown.find((l) => !readingPast(l, findings));
      if (ahead !== undefined) out.push(ahead);
    } else out.push(...limits.filter((l) => l.outcome === 'crossing' || l.outcome === 'after-oil-change'));
  }
  return out;
}

/**
 * Whether a reading the findings judged is at or past the forecast's level, on its side. A group limit's level depends
 * on the oil-hours band, so only the group limit's own finding at that severity says it is past; a change from new oil
 * (viscosity) is past the level of its severity and the lesser one, on the side it moved to.
 */
function readingPast(l: LimitForecast, findings: readonly Finding[]): boolean {
  return findings.some((f) => {
    if (f.measurand !== l.measurand) return false;
    if (l.source === 'population') return f.rule === 'population' && f.severity === l.severity;
    if (f.basis === 'reading') return l.side === 'above' ? f.value >= l.level : f.value <= l.level;
    return f.rule === 'condition' && f.basis === 'change' && (f.value > 0) === (l.side === 'above') && maxSeverity(f.severity, l.severity) === f.severity;
  });
}

function openIncident(
  draft: DraftState,
  key: string,
  kind: IncidentKind,
  findings: Finding[],
  step: VerdictStep,
  options: StepOptions,
  measurand: Measurand | undefined,
): DraftIncident {
  const severity = highest(findings);
  return {
    id: `${key}@${step.sampleId}`,
    key,
    kind,
    unit: draft.unit,
    component: draft.component,
    group: options.group,
    ...(measurand !== undefined && { measurand }),
    openedAt: step.sampledAt,
    openedBySampleId: step.sampleId,
    lastSampleId: step.sampleId,
    lastSampledAt: step.sampledAt,
    alarm: 'active',
    severity,
    peakSeverity: severity,
    activeFindings: [],
    evidence: [],
    context: [],
    acknowledged: null,
    shelved: null,
    closed: null,
    cleanSteps: 0,
    stepsSinceEnd: null,
    live: false,
    lastLive: false,
    timeline: [{ kind: 'opened', at: step.sampledAt, sampleId: step.sampleId, severity }],
    announced: null,
    eventSeq: 0,
    escalation: { policy: null, startedAt: null, firstType: 'wearshift.incident.opened', nextTier: 0, reachedTier: -1, lastSentAt: null, dueAt: null },
    told: { acknowledgedAt: null, returnedAt: null, closed: false, shelvedUntil: null },
    notifications: [],
  };
}

function push(inc: DraftIncident, entry: DraftIncident['timeline'][number]): void {
  inc.timeline.push(entry);
  if (inc.timeline.length > TIMELINE_LIMIT) inc.timeline.splice(1, inc.timeline.length - TIMELINE_LIMIT);
}

function recordFindingChanges(inc: DraftIncident, findings: readonly Finding[], step: VerdictStep): void {
  const before = new Map(inc.activeFindings.map((f) => [findingKey(f), f]));
  const after = new Map(findings.map((f) => [findingKey(f), f]));
  const base = { at: step.sampledAt, sampleId: step.sampleId } as const;
  for (const [k, f] of after) {
    const old = before.get(k);
    const what = { measurand: f.measurand, rule: f.rule, ...(f.check !== undefined && { check: f.check }), ...(f.direction !== undefined && { direction: f.direction }), severity: f.severity, explanation: f.explanation };
    if (old === undefined) push(inc, { kind: 'finding', ...base, change: 'raised', ...what });
    else if (old.severity !== f.severity) push(inc, { kind: 'finding', ...base, change: 'severity-changed', ...what, previousSeverity: old.severity });
  }
  for (const [k, f] of before) {
    if (after.has(k)) continue;
    push(inc, { kind: 'finding', ...base, change: 'cleared', measurand: f.measurand, rule: f.rule, ...(f.check !== undefined && { check: f.check }), ...(f.direction !== undefined && { direction: f.direction }), severity: f.severity });
  }
}

function cleanStep(inc: DraftIncident, step: VerdictStep, options: StepOptions, rules: IncidentRules): void {
  const window = rules.incidents.reopenWithinSamples;
  if (inc.closed !== null) {
    // Counting stops once the reopen window has passed, so a long-closed incident stays unchanged.
    if ((inc.stepsSinceEnd ?? 0) <= window) inc.stepsSinceEnd = (inc.stepsSinceEnd ?? 0) + 1;
    return;
  }
  recordFindingChanges(inc, [], step);
  inc.activeFindings = [];
  inc.lastSampleId = step.sampleId;
  inc.lastSampledAt = step.sampledAt;
  inc.lastLive = !options.quiet;
  inc.cleanSteps += 1;
  if (inc.alarm === 'returned') {
    if ((inc.stepsSinceEnd ?? 0) <= window) inc.stepsSinceEnd = (inc.stepsSinceEnd ?? 0) + 1;
    return;
  }
  if (inc.cleanSteps < rules.incidents.returnAfterSamples) return;
  inc.alarm = 'returned';
  inc.stepsSinceEnd = 0;
  push(inc, { kind: 'returned', at: step.sampledAt, sampleId: step.sampleId, cleanSamples: inc.cleanSteps });
  if (inc.acknowledged !== null) close(inc, { at: step.sampledAt, how: 'acknowledged-and-returned' });
  else if (!inc.live) close(inc, { at: step.sampledAt, how: 'returned-unannounced' });
}

export function close(inc: DraftIncident, closure: Closure): void {
  inc.closed = closure;
  inc.shelved = null;
  inc.stepsSinceEnd = 0;
  push(inc, { kind: 'closed', ...closure });
}

const HOUR = 3_600_000;

/**
 * Applies an operator action to the verdict. Errors name the field or the conflict. `replaying` (folding the
 * history again) skips what no longer applies instead of failing: the action stays in the log all the same.
 */
export function judgeAction(draft: DraftState, action: RecordedAction, rules: IncidentRules, replaying = false): DraftIncident | undefined {
  // A sample verdict belongs to the incidents that hold the sample, never to another incident of the same key.
  const inc = target(draft, action.incidentId, replaying && action.kind !== 'sample-verdict');
  if (inc === undefined) {
    if (replaying) return undefined;
    throw new IncidentNotFoundError(action.incidentId);
  }
  const refuse = (what: string): never | undefined => {
    if (replaying) return undefined;
    throw new IncidentConflictError(inc.id, `is closed (${inc.closed!.how} at ${inc.closed!.at}); cannot ${what} it`);
  };
  const at = action.at;
  switch (action.kind) {
    case 'acknowledge': {
      if (inc.closed !== null) return refuse('acknowledge');
      if (inc.acknowledged !== null) break;
      inc.acknowledged = {
        by: action.by,
        at,
        ...(action.note !== undefined && { note: action.note }),
        ...(action.recipient !== undefined && { recipient: action.recipient }),
        ...(action.credential !== undefined && { credential: action.credential }),
        severity: inc.severity,
        measurands: measurandsOf(inc.evidence),
      };
      push(inc, {
        kind: 'acknowledged',
        at,
        by: action.by,
        ...(action.note !== undefined && { note: action.note }),
        ...(action.recipient !== undefined && { recipient: action.recipient }),
        ...(action.credential !== undefined && { credential: action.credential }),
      });
      if (inc.alarm === 'returned') close(inc, { at, how: 'acknowledged-and-returned', by: action.by });
      break;
    }
    case 'shelve': {
      if (inc.closed !== null) return refuse('shelve');
      if (!replaying) {
        const hours = (Date.parse(action.until) - Date.parse(at)) / HOUR;
        if (!(hours > 0)) throw new InputError(`until: ${action.until} is not in the future`);
        const max = rules.incidents.maxShelveHours;
        if (hours > max) throw new InputError(`until: shelving is limited to ${max} h (incidents.maxShelveHours); ${action.until} is ${Math.round(hours)} h away`);
      }
      // Shelving again until the same time (a double click, a retried request) changes nothing.
      if (inc.shelved?.until === action.until) break;
      inc.shelved = { by: action.by, at, until: action.until, reason: action.reason };
      push(inc, { kind: 'shelved', at, by: action.by, until: action.until, reason: action.reason });
      break;
    }
    case 'unshelve': {
      if (inc.shelved === null) {
        if (replaying || action.by === undefined) return undefined;
        throw new IncidentConflictError(inc.id, 'is not shelved');
      }
      inc.shelved = null;
      push(inc, { kind: 'unshelved', at, ...(action.by !== undefined && { by: action.by }) });
      break;
    }
    case 'resolve': {
      if (inc.closed !== null) return refuse('resolve');
      close(inc, { at, how: 'resolved', by: action.by, note: action.note });
      break;
    }
    case 'note': {
      push(inc, { kind: 'note', at, by: action.by, note: action.note });
      break;
    }
    case 'sample-verdict': {
      // The same word from the same person again (a retried request) changes nothing.
      if (!sameVerdictAsLast(inc, action)) push(inc, { kind: 'sample-verdict', at, sampleId: action.sampleId, verdict: action.verdict, by: action.by });
      break;
    }
  }
  return inc;
}

/** Whether the incident's latest word on the sample is this one, from the same person. */
export function sameVerdictAsLast(inc: { readonly timeline: readonly TimelineEntry[] }, word: { readonly sampleId: string; readonly verdict: string; readonly by: string }): boolean {
  const last = lastWordOn(inc.timeline, word.sampleId);
  return last !== undefined && last.verdict === word.verdict && last.by === word.by;
}

/** The incident an action names; in a refold whose ids changed, the open incident of the same key. */
function target(draft: DraftState, incidentId: string, replaying: boolean): DraftIncident | undefined {
  const exact = Object.values(draft.incidents).find((i) => i.id === incidentId);
  if (exact !== undefined || !replaying) return exact;
  const same = draft.incidents[incidentId.slice(0, incidentId.lastIndexOf('@'))];
  return same !== undefined && same.closed === null ? same : undefined;
}
