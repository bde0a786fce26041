/**
 * Evaluates one component's whole history: the analysis fold (fold/analysisFold.ts) over every sample in order,
 * from the empty state. Pure and deterministic: the same samples (in any order, with any duplicates) give the
 * same steps, so the live worker, `wearshift replay` and the benchmarks agree.
 */
import type { Sample } from '../domain/event.ts';
import type { ComponentSettings } from '../domain/settings.ts';
import { AnalysisFold, emptyAnalysisState, type AnalysisFoldOptions, type AnalysisState, type FoldStep } from './fold/analysisFold.ts';
import { buildHistory } from './history.ts';
import type { Evaluation, GroupStats, SampleMark } from './model.ts';

export interface FullEvaluation extends Evaluation {
  readonly steps: readonly FoldStep[];
  /** The fold's state after the last sample. */
  readonly state: AnalysisState;
}

export interface EvaluateOptions extends AnalysisFoldOptions {
  /** What responders said of samples (in doubt, or of a usual rate), by sampleId. */
  readonly marks?: ReadonlyMap<string, SampleMark>;
  /**
   * The fold's state after the samples before these (a stored checkpoint): the samples given are then the ones after
   * it, and their steps are the ones the whole history gives. Default: the empty state (the samples are the history).
   */
  readonly start?: AnalysisState;
}

/**
 * @param group the group statistics every sample is judged with, or a function giving those that apply to a
 *   sample (as of its sampling time).
 */
export function evaluateComponent(
  samples: Iterable<Sample>,
  settings: ComponentSettings,
  group?: GroupStats | ((sample: Sample) => GroupStats | undefined),
  options: EvaluateOptions = {},
): FullEvaluation {
  const history = buildHistory(samples);
  const fold = new AnalysisFold(settings, options.start ?? emptyAnalysisState(history.unit, history.component), options);
  const groupAt = typeof group === 'function' ? group : () => group;
  const steps = history.samples.map((s) => fold.advance(s, groupAt(s), options.marks?.get(s.sampleId)));
  return { history, steps, baselines: fold.baselines(), state: fold.state() };
}
