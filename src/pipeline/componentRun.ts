/**
 * One evaluation of a component under its lock, from its opening to its commit (evaluateStored.ts runs one at a time;
 * a history job keeps one open across its sampling months). Open: take the lock and read the input; start from the
 * latest checkpoint when every change came after it, else from the latest sparse checkpoint before the earliest
 * change. Fold: the stored samples after what is folded so far, each judged with its group's statistics as of its
 * sampling month (other units only), through the analysis and the incident verdict in lockstep. Share (a run kept
 * open): write the group shares of what was folded since the last share, so that units judged later see them.
 * Commit: checkpoint, findings, group shares, incidents and their messages in one atomic write.
 */
import { AnalysisFold } from '../analysis/fold/analysisFold.ts';
import type { FoldStep } from '../analysis/fold/analysisFold.ts';
import type { Measurand } from '../domain/measurands.ts';
import type { Sample } from '../domain/event.ts';
import { resolveSettings, type ComponentSettings } from '../domain/settings.ts';
import { IncidentFold } from '../incidents/incidentFold.ts';
import { emptyComponentIncidents, type StepPosition } from '../incidents/model.ts';
import { comparePosition, positionOf } from '../incidents/verdict.ts';
import { monthOf, populationShare, startOfNextMonth } from './groupShares.ts';
import { incidentChanges } from './incidentChanges.ts';
import { keepRenewed, type Renewal } from './keepRenewed.ts';
import type { BaselineShare, Checkpoint, ComponentRef, EvaluationCommit, EvaluationInput, Lease, SampleShare, StoredSample } from './ports.ts';
import { emptyCheckpoint, DEFAULT_CHECKPOINT_EVERY, DEFAULT_LOCK_TTL_MS, type EvaluationDeps, type EvaluationResult } from './evaluationResult.ts';

const DAY_MS = 86_400_000;

export type Cascade = readonly { readonly ref: ComponentRef; readonly from: StepPosition }[];

export class ComponentRun {
  private readonly steps: FoldStep[] = [];
  private readonly sparse: Checkpoint[] = [];
  /** Shares of the samples folded since the last `share` (all of them when none was written). */
  private unshared: SampleShare[] = [];
  private count: number;
  private last: Sample | undefined;
  /** Stored samples read after the last folded one and not folded yet; undefined: to be read. */
  private tail: StoredSample[] | undefined;
  private readonly fold: AnalysisFold;
  private readonly incidents: IncidentFold;

  private constructor(
    private readonly deps: EvaluationDeps,
    readonly ref: ComponentRef,
    private readonly lease: Lease,
    private readonly renewal: Renewal,
    private readonly input: EvaluationInput,
    private readonly settings: ComponentSettings,
    private readonly start: Checkpoint,
    /** Started from the latest checkpoint (every change came after it). */
    readonly incremental: boolean,
    private readonly started: number,
    /** The input's change mark plus the changes this run was told it covers (`covers`). */
    private mark: number,
  ) {
    this.count = start.count;
    // The checkpoint was decoded for this run alone: the fold may work on it in place.
    this.fold = new AnalysisFold(settings, start.analysis, { adoptState: true });
    const now = deps.now();
    this.incidents = new IncidentFold(incremental ? input.incidents : start.incidents, input.incidents, {
      group: settings.group,
      now: new Date(now),
      quietBefore: new Date(now - deps.config.backfill.quietAfterDays * DAY_MS),
      rules: deps.rules,
    });
  }

  /** Takes the lock and reads the input; `busy` when another holds the lock, `empty` / `unchanged` (lock let go) when there is nothing to do. */
  static async open(deps: EvaluationDeps, ref: ComponentRef): Promise<ComponentRun | { readonly kind: 'busy' | 'empty' | 'unchanged' }> {
    const started = performance.now();
    const ttl = deps.lockTtlMs ?? DEFAULT_LOCK_TTL_MS;
    const held = await deps.store.acquireWithInput(ref, ttl);
    if (held === undefined) return { kind: 'busy' };
    const { lease, input } = held;
    const renewal = keepRenewed(deps.store, lease, ttl);
    try {
      if (input === undefined || (input.dirtyFrom === undefined && input.latest !== undefined)) {
        renewal.stop();
        await deps.store.release(lease);
        return { kind: input === undefined ? 'empty' : 'unchanged' };
      }
      const latest = input.latest;
      const incremental = latest !== undefined && latest.position !== null && input.dirtyFrom !== undefined && comparePosition(input.dirtyFrom, latest.position) > 0;
      const start: Checkpoint = incremental
        ? latest
        : ((input.dirtyFrom !== undefined ? await deps.store.checkpointBefore(ref, input.dirtyFrom) : undefined) ?? emptyCheckpoint(ref));
      return new ComponentRun(deps, ref, lease, renewal, input, resolveSettings(deps.config, input.entry), start, incremental, started, input.mark);
    } catch (e) {
      renewal.stop();
      await deps.store.release(lease).catch(() => undefined);
      throw e;
    }
  }

  /** The like-for-like group the component is judged with. */
  get group(): string {
    return this.settings.group;
  }

  /** Stored samples read and not folded (a fold stopped at `until`): they stay due after the commit. */
  get leftDue(): boolean {
    return this.tail !== undefined && this.tail.length > 0;
  }

  /** The position of the last sample folded (the checkpoint's when none). */
  get position(): StepPosition | null {
    return this.last !== undefined ? positionOf(this.last) : this.start.position;
  }

  /** The caller stored `changes` more results of this component after the last folded one: the commit covers them. */
  covers(changes: number): void {
    this.mark += changes;
    if (changes > 0) this.tail = undefined;
  }

  /**
   * Reads the stored samples after the last folded one, which the next folds take (a run judged month by month reads
   * them once, right after opening; a read after the input's covers every change the input's mark counts).
   */
  async readStored(): Promise<void> {
    this.tail = await this.deps.store.samplesAfter(this.ref, this.position);
  }

  /**
   * Folds the stored samples after the last folded one, those sampled before `until` (epoch ms) when given (a run
   * taken month by month with later months already stored); returns how many. They are read first unless a read since
   * the last `covers` holds them (`readStored`); what is left of that read stays due after the commit.
   */
  async foldStored(until?: number): Promise<number> {
    const { ledger } = this.deps;
    if (this.tail === undefined) await this.readStored();
    const tail = this.tail!;
    let take = 0;
    while (take < tail.length && (until === undefined || tail[take]!.sample.time < until)) take++;
    const stored = tail.splice(0, take);
    if (stored.length === 0) return 0;
    const group = this.settings.group;
    await ledger.touch(group, this.ref, stored.at(-1)!.sample.time);
    const statsByMonth = await ledger.asOfMonths(group, stored.map((s) => monthOf(s.sample.time)), this.ref);
    const every = this.deps.checkpointEvery ?? DEFAULT_CHECKPOINT_EVERY;
    const quietAfter = this.deps.config.backfill.quietAfterDays * DAY_MS;
    for (const s of stored) {
      const sample = s.sample;
      const stats = statsByMonth.get(monthOf(sample.time));
      const step = this.fold.advance(sample, stats, this.input.marks.get(sample.sampleId));
      this.steps.push(step);
      // The forecast travels with an incident's evidence, so it is made only where a step asks for an incident, only
      // for the measurands of that evidence, and without the projection a chart draws (the evidence keeps the limits').
      const evidence = [...new Set(step.findings.filter((f) => f.disposition === 'incident' && f.rule !== 'sampling').map((f) => f.measurand))];
      const forecast = evidence.length > 0 ? this.fold.forecast(stats, { measurands: evidence, projection: false }) : undefined;
      this.incidents.step({
        ...step,
        time: sample.time,
        ...(sample.unitHours !== undefined && { unitHours: sample.unitHours }),
        quiet: s.receivedAt - sample.time > quietAfter,
        ...(step.status === 'in-doubt' && { inDoubt: true }),
        ...(forecast !== undefined && { forecast }),
      });
      const included = step.status === undefined || step.status === 'confirmed';
      this.unshared.push({ sampleId: sample.sampleId, month: monthOf(sample.time), values: included ? populationShare(sample, this.settings) : null });
      this.count += 1;
      if (this.count % every === 0) this.sparse.push({ position: positionOf(sample), count: this.count, analysis: this.fold.state(), incidents: this.incidents.snapshot() });
      this.last = sample;
    }
    return stored.length;
  }

  /**
   * Writes the group shares of what was folded since the last share, keeping the run open; the other units to judge
   * again when they changed a month others were judged past. `lost-lock`: the run is over (let go with `abandon`).
   */
  async share(): Promise<{ readonly ok: true; readonly cascade: Cascade } | { readonly ok: false }> {
    if (this.renewal.lost) return { ok: false };
    const outcome = await this.deps.store.commitShares(this.ref, this.lease, { group: this.settings.group, shares: this.unshared, baselines: this.baselineShares(), horizon: this.last?.time ?? 0 });
    if (!outcome.ok) return { ok: false };
    this.unshared = [];
    return { ok: true, cascade: await this.cascadeFrom(outcome.changedMonth) };
  }

  /** Commits the run and ends it (the lock goes with a settled commit, else here). */
  async commit(): Promise<EvaluationResult> {
    const { store } = this.deps;
    let result: EvaluationResult | undefined;
    try {
      // What was left due (a run judged up to a month's end) is judged by the run that folds it.
      const dueFrom = this.tail !== undefined && this.tail.length > 0 ? positionOf(this.tail[0]!.sample) : undefined;
      // The incidents on record opened after the start: those the run no longer produces are withdrawn, and those it
      // produces again keep what was told of them. Read also when the run went on from its latest checkpoint: a run
      // before it that left samples due left their incidents on record but not in its state, and an incident produced
      // again without what was told of it would tell it as new, under message keys already used.
      // None opened at or after the start (the lock script says when the latest opened): nothing to read.
      const opened = this.input.lastOpenedAt;
      const none = opened === null || (opened !== undefined && this.start.position !== null && opened < this.start.position.time);
      const recorded = none ? [] : await store.incidentsOpenedAfter(this.ref, this.start.position, dueFrom);
      const leftDue = dueFrom === undefined || none ? [] : await store.incidentsOpenedAfter(this.ref, this.position);
      const verdict = this.incidents.finish(recorded, new Set(leftDue.map((i) => i.id)));
      if (this.renewal.lost) return (result = { kind: 'lost-lock' });
      const ref = this.ref;
      const commit: EvaluationCommit = {
        mark: this.mark,
        group: this.settings.group,
        latest: { position: this.position, count: this.count, analysis: this.fold.finalState(), incidents: emptyComponentIncidents(ref.unit, ref.component) },
        sparse: this.sparse,
        rewoundTo: this.incremental ? undefined : this.start.position,
        steps: this.steps.map((s) => ({ sampleId: s.sampleId, sampledAt: s.sampledAt, findings: s.findings, ...(s.status && { status: s.status }) })),
        shares: this.unshared,
        baselines: this.baselineShares(),
        incidents: verdict.state,
        incidentsVersion: this.input.incidentsVersion,
        recorded: this.input.incidents,
        effects: verdict.effects,
        archived: verdict.archived,
        withdrawn: verdict.withdrawn,
        horizon: this.last?.time ?? 0,
        // What is left of the last read stays due from its first sample (a run judged up to a month's end).
        ...(dueFrom !== undefined && { dueFrom }),
        releaseWhenSettled: true,
      };
      const outcome = await store.commit(ref, this.lease, commit);
      if (!outcome.ok) return (result = { kind: outcome.reason === 'lost-lock' ? 'lost-lock' : 'retry' });
      return (result = {
        kind: 'evaluated',
        group: this.settings.group,
        steps: this.steps,
        rewound: !this.incremental && this.input.latest !== undefined,
        changes: incidentChanges(this.input.incidents, verdict.state, verdict.withdrawn),
        effects: verdict.effects,
        cascade: await this.cascadeFrom(outcome.changedMonth),
        settled: outcome.settled,
        durationMs: performance.now() - this.started,
      });
    } finally {
      this.renewal.stop();
      // A settled commit let go of the lock in its own write.
      if (!(result?.kind === 'evaluated' && result.settled)) await store.release(this.lease);
    }
  }

  /** Ends the run without committing: what it folded is judged again by the next evaluation (the component stays due). */
  async abandon(): Promise<void> {
    this.renewal.stop();
    await this.deps.store.release(this.lease);
  }

  /** The other members of the group judged past the month after `changedMonth`, to judge again from there. */
  private async cascadeFrom(changedMonth: string | undefined): Promise<Cascade> {
    if (changedMonth === undefined) return [];
    const from = startOfNextMonth(changedMonth);
    const out: { ref: ComponentRef; from: StepPosition }[] = [];
    for (const member of await this.deps.ledger.membersAfter(this.settings.group, from)) {
      if (member.unit === this.ref.unit && member.component === this.ref.component) continue;
      out.push({ ref: member, from: { sampleId: '', time: from } });
    }
    return out;
  }

  /** The component's complete own baselines, each with the month it was complete in. */
  private baselineShares(): Partial<Record<Measurand, BaselineShare>> {
    const out: Partial<Record<Measurand, BaselineShare>> = {};
    const state = this.fold.finalState();
    for (const [m, sums] of Object.entries(this.fold.baselines()) as [Measurand, NonNullable<ReturnType<AnalysisFold['baselines']>[Measurand]>][]) {
      const at = state.change[m]?.own.completedSampledAt;
      // A copy: the fold goes on changing its own sums, and a store may keep what it is given.
      if (at !== undefined && this.settings.detection.measurands.includes(m)) out[m] = { month: monthOf(Date.parse(at)), sums: { ...sums } };
    }
    return out;
  }
}
