/**
 * The one view of a component that the charts, the series API, the board and the backtest report read: its
 * history, its settings, the group statistics each sample was judged with (as of its sampling month, other units
 * only), the whole evaluation folded from the start with the responders' marks — the same steps the worker's
 * checkpoints reached — and what the analysis cannot judge yet.
 */
import { evaluateComponent, type FullEvaluation } from '../analysis/evaluate.ts';
import type { GroupStats, SampleMark } from '../analysis/model.ts';
import type { AnalysisState } from '../analysis/fold/analysisFold.ts';
import type { Sample } from '../domain/event.ts';
import { readinessOf, type MeasurandReadiness } from '../analysis/readiness.ts';
import type { Config } from '../domain/config.ts';
import { resolveSettings, type ComponentSettings } from '../domain/settings.ts';
import { monthOf } from './groupShares.ts';
import type { ComponentEntry, ComponentRef, ComponentStore, GroupLedger } from './ports.ts';

export interface ComponentView {
  readonly entry: ComponentEntry;
  readonly settings: ComponentSettings;
  readonly evaluation: FullEvaluation;
  /** The group statistics the latest sample was judged with. */
  readonly group: GroupStats | undefined;
  readonly readiness: readonly MeasurandReadiness[];
}

export async function componentView(store: ComponentStore, ledger: GroupLedger, config: Config, ref: ComponentRef): Promise<ComponentView | undefined> {
  const [entry, input] = await Promise.all([store.component(ref), store.evaluationInput(ref)]);
  if (entry === undefined) return undefined;
  const settings = resolveSettings(config, entry);
  const stored = await store.samplesAfter(ref, null);
  const [stats, others] = await Promise.all([ledger.asOfMonths(settings.group, stored.map((s) => monthOf(s.sample.time)), ref), ledger.othersIn(settings.group, ref)]);
  return viewOf(
    entry,
    settings,
    stored.map((s) => s.sample),
    (s) => stats.get(monthOf(s.time)),
    input?.marks ?? new Map(),
    undefined,
    others,
  );
}

/**
 * The view from its parts (pure): the history folded with the group statistics of each sample; with `start` (a stored
 * checkpoint's state) only the samples after it, which then give the steps the whole history gives. `others`: how many
 * other components the group holds now, for the readiness lines (undefined: not known).
 */
export function viewOf(
  entry: ComponentEntry,
  settings: ComponentSettings,
  samples: readonly Sample[],
  groupAt: (s: Sample) => GroupStats | undefined,
  marks: ReadonlyMap<string, SampleMark> = new Map(),
  start?: AnalysisState,
  others?: number,
): ComponentView {
  const evaluation = evaluateComponent(samples, settings, groupAt, { marks, ...(start !== undefined && { start }) });
  const latest = evaluation.history.samples.at(-1);
  const group = latest === undefined ? undefined : groupAt(latest);
  return { entry, settings, evaluation, group, readiness: readinessOf(evaluation.state, settings, group, evaluation.history.samples, others) };
}
