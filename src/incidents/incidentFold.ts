/**
 * A component's incidents folded over evaluation steps, one at a time, from a checkpoint of the verdict: the verdict
 * (verdict.ts) judges each step and puts every action logged since the checkpoint back after the step it followed.
 * The same fold serves a result that arrives in order (the checkpoint is the latest state, nothing to put back) and
 * a late, revised or re-judged one (an older checkpoint, the steps after it folded again).
 *
 * What was told is not rewound: at the end each incident takes the annunciation record of the incident of the same
 * id now, and the annunciation tells the difference — a new incident, new evidence — as news. An open incident the
 * new verdict no longer holds is closed, and everyone told of it is told so: as answered when a responder's word on
 * the sample that opened it took it away (`sample-verdict`), else as withdrawn by the changed history. Either way its
 * alarm is no longer active and its findings are set aside as no longer holding (`withdrawnEvidence`), never left as
 * its current evidence.
 */
import { draftOf, type DraftIncident, type DraftState, type Work } from './draft.ts';
import { annunciate } from './escalation.ts';
import type { IncidentStep, StepContext } from './applySteps.ts';
import type { Closure, ComponentIncidents, Incident, IncidentResult, LoggedAction } from './model.ts';
import { closingVerdict } from './sampleVerdict.ts';
import { endExpiredShelving } from './shelving.ts';
import { close, comparePosition, judgeAction, judgeStep, positionOf } from './verdict.ts';

export interface IncidentFoldResult extends IncidentResult {
  /**
   * Incidents that no longer stand (they leave the component's state): closed as withdrawn, or as `sample-verdict`
   * when a responder's word on their opening sample took them away.
   */
  readonly withdrawn: readonly Incident[];
  readonly archived: readonly Incident[];
}

export class IncidentFold {
  private readonly draft: DraftState;
  private readonly pending: LoggedAction[];
  private next = 0;

  /**
   * @param base the verdict at the checkpoint (its actions up to `base.actionSeq` included)
   * @param current the component's incidents now: its action log and what was told
   */
  constructor(
    base: ComponentIncidents,
    private readonly current: ComponentIncidents,
    private readonly ctx: StepContext,
  ) {
    this.draft = draftOf({ ...base, actions: [], actionSeq: base.actionSeq });
    this.pending = current.actions.filter((a) => a.seq > base.actionSeq).sort((a, b) => a.seq - b.seq);
    this.replayUpTo(this.draft.judged);
  }

  step(step: IncidentStep): void {
    const time = step.time ?? Date.parse(step.sampledAt);
    const judged = { ...step, time };
    judgeStep(this.draft, judged, { quiet: step.quiet ?? time < this.ctx.quietBefore.getTime(), group: this.ctx.group }, this.ctx.rules);
    this.replayUpTo(positionOf(judged));
  }

  /** The verdict so far, for a checkpoint. */
  snapshot(): ComponentIncidents {
    const { replaced: _r, ...state } = this.draft;
    return structuredClone({ ...state, actions: [], actionSeq: this.pending[this.next - 1]?.seq ?? this.draft.actionSeq }) as ComponentIncidents;
  }

  /**
   * @param recorded incidents of the component on record that opened after the checkpoint (a refold may no longer
   *   produce them: they are withdrawn)
   * @param leftDue ids of incidents opened by samples after the last one folded (a run judged up to a month's end left
   *   them due): not this fold's to judge, they are neither withdrawn nor kept in its state, and stay on record as
   *   they stand for the run that folds their samples (which reads them back with `recorded`)
   */
  finish(recorded: readonly Incident[] = [], leftDue: ReadonlySet<string> = new Set()): IncidentFoldResult {
    const draft = this.draft;
    const work: Work = { now: this.ctx.now, rules: this.ctx.rules, effects: [] };
    // Actions logged after a step the history no longer reaches still apply, at the end.
    while (this.next < this.pending.length) judgeAction(draft, this.pending[this.next++]!.action, this.ctx.rules, true);
    draft.actions = structuredClone([...this.current.actions]);
    draft.actionSeq = this.current.actionSeq;
    const archived = draft.replaced ?? [];
    delete draft.replaced;
    const told = new Map([...recorded, ...Object.values(this.current.incidents)].map((i) => [i.id, i]));
    const produced = new Set<string>();
    for (const inc of [...Object.values(draft.incidents), ...archived]) {
      produced.add(inc.id);
      const before = told.get(inc.id);
      if (before !== undefined) carryAnnunciation(inc, before);
    }
    const withdrawn: DraftIncident[] = [];
    for (const before of told.values()) {
      if (produced.has(before.id) || leftDue.has(before.id) || before.closed?.how === 'withdrawn' || before.closed?.how === 'sample-verdict') continue;
      const gone = structuredClone(before) as DraftIncident;
      const closure = goneBecause(before, this.ctx.now);
      if (gone.closed === null) close(gone, closure);
      else {
        gone.closed = closure;
        gone.timeline.push({ kind: 'closed', ...closure });
      }
      setEvidenceAside(gone);
      withdrawn.push(gone);
    }
    endExpiredShelving(draft, work);
    annunciate([...Object.values(draft.incidents), ...withdrawn], work);
    return { state: draft, effects: work.effects, withdrawn, archived };
  }

  private replayUpTo(position: LoggedAction['after']): void {
    while (this.next < this.pending.length) {
      const logged = this.pending[this.next]!;
      if (logged.after !== null && (position === null || comparePosition(logged.after, position) > 0)) return;
      judgeAction(this.draft, logged.action, this.ctx.rules, true);
      this.next += 1;
    }
  }
}

/**
 * Why an incident the history no longer produces is gone: a responder's word on the sample that opened it (closed as
 * `sample-verdict`, at the time the word was given, so a refold with the same words closes it the same way), or else a
 * late or corrected result (`withdrawn`, now).
 */
function goneBecause(incident: Incident, now: Date): Closure {
  const word = closingVerdict(incident);
  if (word === undefined) return { at: now.toISOString(), how: 'withdrawn' };
  return { at: word.at, how: 'sample-verdict', by: word.by, sampleId: word.sampleId, verdict: word.verdict };
}

/**
 * An incident the history no longer produces stands on nothing: its alarm is no longer active, and the findings it
 * stood on, which the history no longer gives, leave its evidence (and with them the advisory findings and forecasts
 * of their sample) for `withdrawnEvidence`, so that no closing message, page or condition shows them as current.
 */
function setEvidenceAside(gone: DraftIncident): void {
  if (gone.evidence.length > 0) gone.withdrawnEvidence = gone.evidence;
  gone.alarm = 'returned';
  gone.evidence = [];
  gone.activeFindings = [];
  gone.context = [];
  delete gone.forecast;
}

function carryAnnunciation(inc: DraftIncident, before: Incident): void {
  const { announced, eventSeq, escalation, told, notifications } = before;
  const copy = structuredClone({ announced, eventSeq, escalation, told, notifications });
  inc.announced = copy.announced;
  inc.eventSeq = copy.eventSeq;
  inc.escalation = copy.escalation;
  inc.told = copy.told;
  inc.notifications = [...copy.notifications];
}
