/**
 * Feeds one component's evaluation steps into its incidents: a step with findings opens or updates the
 * incident of its key, consecutive clean steps return it to normal, and a finding soon after the return
 * reopens it rather than opening a new one. Steps already judged are skipped, so redelivery changes nothing;
 * a re-evaluation that changes the findings of the last step judged is applied as a revision of that step.
 */
import type { Step } from '../analysis/model.ts';
import { InputError } from '../domain/errors.ts';
import { findingKey, maxSeverity, type Finding, type Severity } from '../domain/finding.ts';
import { closeIncident } from './closing.ts';
import { draftOf, type DraftIncident, type DraftState, type Work } from './draft.ts';
import { announceIfDue, tellReached } from './escalation.ts';
import type { Measurand } from '../domain/measurands.ts';
import type { ComponentIncidents, IncidentResult } from './model.ts';
import type { IncidentRules } from './policy.ts';
import { endExpiredShelving } from './shelving.ts';

export interface StepContext {
  /** The component's group now; an incident takes the group of its latest step. */
  readonly group: string;
  readonly now: Date;
  /** Steps of samples drawn before this time are backfill: recorded in full, but nobody is notified. */
  readonly quietBefore: Date;
  readonly rules: IncidentRules;
}

interface StepOptions {
  readonly revision: boolean;
  readonly quiet: boolean;
  readonly group: string;
}

export function applySteps(state: ComponentIncidents, steps: readonly Step[], ctx: StepContext): IncidentResult {
  const draft = draftOf(state);
  const work: Work = { now: ctx.now, rules: ctx.rules, effects: [] };
  endExpiredShelving(draft, work);
  for (const step of lastOccurrences(steps)) {
    const time = Date.parse(step.sampledAt);
    if (Number.isNaN(time)) throw new InputError(`step of sample "${step.sampleId}": sampledAt "${step.sampledAt}" is not a date-time`);
    const misplaced = step.findings.find((f) => f.unit !== state.unit || f.component !== state.component);
    if (misplaced !== undefined) {
      throw new InputError(`step of sample "${step.sampleId}": a finding of ${misplaced.unit}/${misplaced.component} cannot go to ${state.unit}/${state.component}`);
    }
    const fingerprint = JSON.stringify(step.findings);
    const judged = draft.judged;
    const judgedTime = judged === null ? Number.NEGATIVE_INFINITY : Date.parse(judged.sampledAt);
    let revision = false;
    if (judged !== null && time < judgedTime) continue;
    if (judged !== null && time === judgedTime && judged.sampleIds.includes(step.sampleId)) {
      if (step.sampleId !== judged.lastSampleId || fingerprint === judged.lastFingerprint) continue;
      revision = true;
    }
    judgeStep(draft, step, { revision, quiet: time < ctx.quietBefore.getTime(), group: ctx.group }, work);
    const sameInstant = judged !== null && time === judgedTime ? judged.sampleIds.filter((id) => id !== step.sampleId) : [];
    draft.judged = { sampledAt: step.sampledAt, sampleIds: [...sameInstant, step.sampleId], lastSampleId: step.sampleId, lastFingerprint: fingerprint };
  }
  return { state: draft, effects: work.effects };
}

/** A batch that names a sample twice means its last version. */
function lastOccurrences(steps: readonly Step[]): Step[] {
  const last = new Map<string, number>();
  steps.forEach((s, i) => last.set(s.sampleId, i));
  return steps.filter((s, i) => last.get(s.sampleId) === i);
}

function keyOf(unit: string, component: string, f: Finding, scope: IncidentRules['incidents']['scope']): string {
  return scope === 'measurand' ? `${unit}/${component}/${f.measurand}` : `${unit}/${component}`;
}

function judgeStep(draft: DraftState, step: Step, options: StepOptions, work: Work): void {
  const byKey = new Map<string, Finding[]>();
  for (const f of step.findings) {
    const key = keyOf(draft.unit, draft.component, f, work.rules.incidents.scope);
    byKey.set(key, [...(byKey.get(key) ?? []), f]);
  }
  const keys = [...new Set([...Object.keys(draft.incidents), ...byKey.keys()])].sort();
  for (const key of keys) {
    const findings = byKey.get(key);
    const existing = draft.incidents[key];
    if (findings !== undefined) draft.incidents[key] = withFindings(draft, key, existing, findings, step, options, work);
    else if (existing !== undefined) cleanStep(existing, step, options, work);
  }
}

function highest(findings: readonly Finding[]): Severity {
  return findings.map((f) => f.severity).reduce(maxSeverity);
}

function withFindings(
  draft: DraftState,
  key: string,
  existing: DraftIncident | undefined,
  findings: Finding[],
  step: Step,
  options: StepOptions,
  work: Work,
): DraftIncident {
  const window = work.rules.incidents.reopenWithinSamples;
  let inc = existing;
  // The revised step was counted once as a clean sample since the return to normal; it is not a further one.
  if (inc !== undefined && options.revision && inc.closed === null && inc.activeFindings.length === 0 && inc.stepsSinceEnd !== null && inc.stepsSinceEnd > 0) {
    inc.stepsSinceEnd -= 1;
  }
  if (inc === undefined || (inc.closed !== null && (inc.stepsSinceEnd ?? 0) >= window)) {
    inc = openIncident(draft, key, findings, step, options, work.rules.incidents.scope === 'measurand' ? findings[0]!.measurand : undefined);
  } else if (inc.closed !== null) {
    inc.closed = null;
    inc.alarm = 'active';
    inc.stepsSinceEnd = null;
    inc.timeline.push({ kind: 'active-again', at: step.sampledAt, sampleId: step.sampleId, reopened: true });
  } else if (inc.alarm === 'returned') {
    inc.alarm = 'active';
    inc.stepsSinceEnd = null;
    inc.timeline.push({ kind: 'active-again', at: step.sampledAt, sampleId: step.sampleId, reopened: false });
  }
  recordFindingChanges(inc, findings, step);
  inc.group = options.group;
  inc.activeFindings = findings;
  inc.evidence = findings;
  inc.severity = highest(findings);
  inc.peakSeverity = maxSeverity(inc.peakSeverity, inc.severity);
  inc.cleanSteps = 0;
  inc.lastSampleId = step.sampleId;
  inc.lastSampledAt = step.sampledAt;
  announceIfDue(inc, work, { quiet: options.quiet });
  return inc;
}

function openIncident(draft: DraftState, key: string, findings: Finding[], step: Step, options: StepOptions, measurand: Measurand | undefined): DraftIncident {
  const severity = highest(findings);
  return {
    id: `${key}@${step.sampleId}`,
    key,
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
    acknowledged: null,
    shelved: null,
    closed: null,
    cleanSteps: 0,
    stepsSinceEnd: null,
    announced: null,
    eventSeq: 0,
    escalation: { policy: null, startedAt: null, firstType: 'wearshift.incident.opened', nextTier: 0, reachedTier: -1, lastSentAt: null, dueAt: null },
    timeline: [{ kind: 'opened', at: step.sampledAt, sampleId: step.sampleId, severity }],
  };
}

function recordFindingChanges(inc: DraftIncident, findings: readonly Finding[], step: Step): void {
  const before = new Map(inc.activeFindings.map((f) => [findingKey(f), f]));
  const after = new Map(findings.map((f) => [findingKey(f), f]));
  const base = { at: step.sampledAt, sampleId: step.sampleId } as const;
  for (const [k, f] of after) {
    const old = before.get(k);
    const what = { measurand: f.measurand, rule: f.rule, ...(f.direction !== undefined && { direction: f.direction }), severity: f.severity, explanation: f.explanation };
    if (old === undefined) inc.timeline.push({ kind: 'finding', ...base, change: 'raised', ...what });
    else if (old.severity !== f.severity) inc.timeline.push({ kind: 'finding', ...base, change: 'severity-changed', ...what, previousSeverity: old.severity });
  }
  for (const [k, f] of before) {
    if (after.has(k)) continue;
    inc.timeline.push({ kind: 'finding', ...base, change: 'cleared', measurand: f.measurand, rule: f.rule, ...(f.direction !== undefined && { direction: f.direction }), severity: f.severity });
  }
}

function cleanStep(inc: DraftIncident, step: Step, options: StepOptions, work: Work): void {
  // A revision is not a further sample: clean again, or after the closing, it changes nothing here.
  if (options.revision && (inc.closed !== null || inc.activeFindings.length === 0)) return;
  const window = work.rules.incidents.reopenWithinSamples;
  if (inc.closed !== null) {
    // Counting stops once the reopen window has passed, so a long-closed incident stays unchanged.
    if ((inc.stepsSinceEnd ?? 0) <= window) inc.stepsSinceEnd = (inc.stepsSinceEnd ?? 0) + 1;
    return;
  }
  recordFindingChanges(inc, [], step);
  inc.activeFindings = [];
  inc.lastSampleId = step.sampleId;
  inc.lastSampledAt = step.sampledAt;
  inc.cleanSteps += 1;
  if (inc.alarm === 'returned') {
    if ((inc.stepsSinceEnd ?? 0) <= window) inc.stepsSinceEnd = (inc.stepsSinceEnd ?? 0) + 1;
    return;
  }
  if (inc.cleanSteps < work.rules.incidents.returnAfterSamples) return;
  inc.alarm = 'returned';
  inc.stepsSinceEnd = 0;
  inc.timeline.push({ kind: 'returned', at: step.sampledAt, sampleId: step.sampleId });
  if (inc.acknowledged !== null || inc.announced === null) {
    const how = inc.acknowledged !== null ? 'acknowledged-and-returned' : 'returned-unannounced';
    closeIncident(inc, { at: step.sampledAt, how }, work, options);
  } else if (!options.quiet && inc.shelved === null) {
    tellReached(inc, work, 'wearshift.incident.returned', `returned to normal after ${inc.cleanSteps} samples without findings; still unacknowledged`);
  }
}
