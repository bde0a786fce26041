/**
 * The evaluation of one stored component, shared by the live worker, replay and backtest. Under the component's
 * lock: start from the latest checkpoint when every change came after it (a result in order: the cost does not grow
 * with the history), else from the latest sparse checkpoint before the earliest change (a late, revised or re-judged
 * result); fold the samples after it through the analysis (each judged with its group's statistics as of its
 * sampling month, from other units only) and the incident verdict in lockstep; let the annunciation tell what
 * changed; and commit checkpoint, findings, group shares, incidents and their messages in one atomic write.
 *
 * A commit that changes the group's statistics of a month before others were evaluated up to marks them for
 * evaluation again from the month after (`cascade`), so that every verdict ends up depending on the set of results
 * only, whatever the order they arrived in.
 */
import { AnalysisFold, emptyAnalysisState, type AnalysisState, type FoldStep } from '../analysis/fold/analysisFold.ts';
import type { Config } from '../domain/config.ts';
import { resolveSettings, type ComponentSettings } from '../domain/settings.ts';
import { IncidentFold } from '../incidents/incidentFold.ts';
import { emptyComponentIncidents, type StepPosition } from '../incidents/model.ts';
import type { IncidentRules } from '../incidents/policy.ts';
import { comparePosition, positionOf } from '../incidents/verdict.ts';
import { monthOf, populationShare, startOfNextMonth } from './groupShares.ts';
import type { BaselineShare, Checkpoint, ComponentRef, ComponentStore, EvaluationCommit, EvaluationInput, GroupLedger, Lease, SampleShare, StoredSample } from './ports.ts';
import { keepRenewed } from './keepRenewed.ts';
import { incidentChanges } from './incidentChanges.ts';
import type { IncidentChange } from './incidentChanges.ts';
import type { IncidentEffect } from '../incidents/model.ts';
import type { Measurand } from '../domain/measurands.ts';

export interface EvaluationDeps {
  readonly store: ComponentStore;
  readonly ledger: GroupLedger;
  readonly config: Config;
  readonly rules: IncidentRules;
  /** Processing time, epoch ms. */
  readonly now: () => number;
  /** Lifetime of the component lock, renewed at a third of it. Default 30 000 ms. */
  readonly lockTtlMs?: number;
  /** A sparse checkpoint every this many samples. Default 50. */
  readonly checkpointEvery?: number;
}

export const DEFAULT_LOCK_TTL_MS = 30_000;
export const DEFAULT_CHECKPOINT_EVERY = 50;
const DAY_MS = 86_400_000;

export type EvaluationResult =
  | { readonly kind: 'busy' }
  | { readonly kind: 'empty' }
  | { readonly kind: 'unchanged' }
  | { readonly kind: 'lost-lock' }
  | { readonly kind: 'retry' }
  | {
      readonly kind: 'evaluated';
      readonly group: string;
      /** The steps this evaluation folded, in history order (after a rewind, the earlier ones again). */
      readonly steps: readonly FoldStep[];
      /** Whether the fold started before the latest checkpoint (a late, revised or re-judged result). */
      readonly rewound: boolean;
      readonly changes: readonly IncidentChange[];
      readonly effects: readonly IncidentEffect[];
      /** Other components of the group to evaluate again, from the given position. */
      readonly cascade: readonly { readonly ref: ComponentRef; readonly from: StepPosition }[];
      /** Nothing arrived while it ran: no evaluation of the component is due now (its lock is already let go). */
      readonly settled: boolean;
      readonly durationMs: number;
    };

export async function evaluateStored(deps: EvaluationDeps, ref: ComponentRef): Promise<EvaluationResult> {
  const started = performance.now();
  const ttl = deps.lockTtlMs ?? DEFAULT_LOCK_TTL_MS;
  const held = await deps.store.acquireWithInput(ref, ttl);
  if (held === undefined) return { kind: 'busy' };
  const { lease, input } = held;
  const renewal = keepRenewed(deps.store, lease, ttl);
  let result: EvaluationResult | undefined;
  try {
    if (input === undefined) return (result = { kind: 'empty' });
    return (result = await evaluateUnderLease(deps, ref, lease, input, started, () => renewal.lost));
  } finally {
    renewal.stop();
    // A settled commit let go of the lock in its own write.
    if (!(result?.kind === 'evaluated' && result.settled)) await deps.store.release(lease);
  }
}

async function evaluateUnderLease(deps: EvaluationDeps, ref: ComponentRef, lease: Lease, input: EvaluationInput, started: number, lost: () => boolean): Promise<EvaluationResult> {
  const { store, ledger } = deps;
  if (input.dirtyFrom === undefined && input.latest !== undefined) return { kind: 'unchanged' };
  const settings = resolveSettings(deps.config, input.entry);
  const latest = input.latest;
  const incremental = latest !== undefined && latest.position !== null && input.dirtyFrom !== undefined && comparePosition(input.dirtyFrom, latest.position) > 0;
  const start: Checkpoint = incremental
    ? latest
    : ((input.dirtyFrom !== undefined ? await store.checkpointBefore(ref, input.dirtyFrom) : undefined) ?? emptyCheckpoint(ref));
  const stored = await store.samplesAfter(ref, start.position);
  if (stored.length === 0 && incremental) return { kind: 'unchanged' };

  const now = deps.now();
  const group = settings.group;
  if (stored.length > 0) await ledger.touch(group, ref, stored.at(-1)!.sample.time);
  const statsByMonth = await ledger.asOfMonths(group, stored.map((s) => monthOf(s.sample.time)), ref);

  // The checkpoint was decoded for this evaluation alone: the fold may work on it in place.
  const fold = new AnalysisFold(settings, start.analysis, { adoptState: true });
  const incidents = new IncidentFold(incremental ? input.incidents : start.incidents, input.incidents, {
    group,
    now: new Date(now),
    quietBefore: new Date(now - deps.config.backfill.quietAfterDays * DAY_MS),
    rules: deps.rules,
  });
  const every = deps.checkpointEvery ?? DEFAULT_CHECKPOINT_EVERY;
  const quietAfter = deps.config.backfill.quietAfterDays * DAY_MS;
  const steps: FoldStep[] = [];
  const shares: SampleShare[] = [];
  const sparse: Checkpoint[] = [];
  let count = start.count;
  for (const s of stored) {
    const sample = s.sample;
    const stats = statsByMonth.get(monthOf(sample.time));
    const step = fold.advance(sample, stats, input.marks.get(sample.sampleId));
    steps.push(step);
    // The forecast travels with an incident's evidence, so it is made only where a step asks for an incident, and
    // only for the measurands of that evidence.
    const evidence = [...new Set(step.findings.filter((f) => f.disposition === 'incident' && f.rule !== 'sampling').map((f) => f.measurand))];
    const forecast = evidence.length > 0 ? fold.forecast(stats, { measurands: evidence }) : undefined;
    incidents.step({
      ...step,
      time: sample.time,
      ...(sample.unitHours !== undefined && { unitHours: sample.unitHours }),
      quiet: s.receivedAt - sample.time > quietAfter,
      ...(step.status === 'in-doubt' && { inDoubt: true }),
      ...(forecast !== undefined && { forecast }),
    });
    const included = step.status === undefined || step.status === 'confirmed';
    shares.push({ sampleId: sample.sampleId, month: monthOf(sample.time), values: included ? populationShare(sample, settings) : null });
    count += 1;
    if (count % every === 0) sparse.push({ position: positionOf(sample), count, analysis: fold.state(), incidents: incidents.snapshot() });
  }
  const verdict = incidents.finish(incremental ? [] : await store.incidentsOpenedAfter(ref, start.position));
  if (lost()) return { kind: 'lost-lock' };
  const last = stored.at(-1)?.sample;
  const finalState = fold.finalState();
  const commit: EvaluationCommit = {
    mark: input.mark,
    group,
    latest: { position: last ? positionOf(last) : start.position, count, analysis: finalState, incidents: emptyComponentIncidents(ref.unit, ref.component) },
    sparse,
    rewoundTo: incremental ? undefined : start.position,
    steps: steps.map((s) => ({ sampleId: s.sampleId, sampledAt: s.sampledAt, findings: s.findings, ...(s.status && { status: s.status }) })),
    shares,
    baselines: baselineShares(fold, finalState, settings),
    incidents: verdict.state,
    incidentsVersion: input.incidentsVersion,
    recorded: input.incidents,
    effects: verdict.effects,
    archived: verdict.archived,
    withdrawn: verdict.withdrawn,
    horizon: last?.time ?? 0,
    releaseWhenSettled: true,
  };
  const outcome = await store.commit(ref, lease, commit);
  if (!outcome.ok) return { kind: outcome.reason === 'lost-lock' ? 'lost-lock' : 'retry' };
  const cascade: { ref: ComponentRef; from: StepPosition }[] = [];
  if (outcome.changedMonth !== undefined) {
    const from = startOfNextMonth(outcome.changedMonth);
    for (const member of await ledger.membersAfter(group, from)) {
      if (member.unit === ref.unit && member.component === ref.component) continue;
      cascade.push({ ref: member, from: { sampleId: '', time: from } });
    }
  }
  return {
    kind: 'evaluated',
    group,
    steps,
    rewound: !incremental && latest !== undefined,
    changes: incidentChanges(input.incidents, verdict.state, verdict.withdrawn),
    effects: verdict.effects,
    cascade,
    settled: outcome.settled,
    durationMs: performance.now() - started,
  };
}

export function emptyCheckpoint(ref: ComponentRef): Checkpoint {
  return { position: null, count: 0, analysis: emptyAnalysisState(ref.unit, ref.component), incidents: emptyComponentIncidents(ref.unit, ref.component) };
}

/** The component's complete own baselines, each with the month it was complete in (from the fold's final state). */
function baselineShares(fold: AnalysisFold, state: AnalysisState, settings: ComponentSettings): Partial<Record<Measurand, BaselineShare>> {
  const out: Partial<Record<Measurand, BaselineShare>> = {};
  for (const [m, sums] of Object.entries(fold.baselines()) as [Measurand, NonNullable<ReturnType<AnalysisFold['baselines']>[Measurand]>][]) {
    const at = state.change[m]?.own.completedSampledAt;
    if (at !== undefined && settings.detection.measurands.includes(m)) out[m] = { month: monthOf(Date.parse(at)), sums };
  }
  return out;
}

export type { StoredSample };
