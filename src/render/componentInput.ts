/**
 * What a component's chart or series is computed from, loaded from the store on the request's thread and handed
 * (structured-cloned) to a chart thread: the component, its settings, its samples, the group statistics of each
 * sampling month and the responders' marks. The evaluation itself, the costly part, runs on the chart thread.
 */
import type { GroupStats, SampleMark } from '../analysis/model.ts';
import type { Config } from '../domain/config.ts';
import type { Sample } from '../domain/event.ts';
import { resolveSettings, type ComponentSettings } from '../domain/settings.ts';
import { monthOf } from '../pipeline/groupShares.ts';
import type { ComponentEntry, ComponentRef, ComponentStore, GroupLedger } from '../pipeline/ports.ts';
import { viewStart } from '../pipeline/viewStart.ts';
import type { AnalysisState } from '../analysis/fold/analysisFold.ts';

export interface ComponentInput {
  readonly entry: ComponentEntry;
  readonly settings: ComponentSettings;
  readonly samples: readonly Sample[];
  /** Group statistics by sampling month ("2026-03"), as of that month. */
  readonly groups: ReadonlyMap<string, GroupStats | undefined>;
  readonly marks: ReadonlyMap<string, SampleMark>;
  /** How many other components the group holds now (for the readiness lines); undefined when not known. */
  readonly others?: number;
  /** Where the samples start when they are not the whole history: the analysis state after the earlier ones, and how many those are. */
  readonly start?: { readonly analysis: AnalysisState; readonly samples: number };
}

export interface ComponentInputOptions {
  /**
   * Load at least this many of the latest samples, and start from the latest stored checkpoint before them rather
   * than from the first sample, so that the work a chart or series costs (reading, evaluating, cloning to the chart
   * thread) is bounded by this and not by the length of the history. Default: the whole history.
   */
  readonly latestSamples?: number;
}

export async function componentInput(store: ComponentStore, ledger: GroupLedger, config: Config, ref: ComponentRef, options: ComponentInputOptions = {}): Promise<ComponentInput | undefined> {
  const [entry, input] = await Promise.all([store.component(ref), store.evaluationInput(ref)]);
  if (entry === undefined) return undefined;
  const settings = resolveSettings(config, entry);
  const start = await viewStart(store, ref, input, options.latestSamples);
  const samples = (await store.samplesAfter(ref, start?.position ?? null)).map((s) => s.sample);
  const [groups, others]: [Map<string, GroupStats | undefined>, number] = await Promise.all([ledger.asOfMonths(settings.group, samples.map((s) => monthOf(s.time)), ref), ledger.othersIn(settings.group, ref)]);
  return { entry, settings, samples, groups, marks: input?.marks ?? new Map(), others, ...(start !== undefined && { start: { analysis: start.analysis, samples: start.count } }) };
}

/** The input from its parts, the group statistics given per sample (tests, fixtures). */
export function inputOf(entry: ComponentEntry, settings: ComponentSettings, samples: readonly Sample[], groupAt: (s: Sample) => GroupStats | undefined = () => undefined, marks: ReadonlyMap<string, SampleMark> = new Map()): ComponentInput {
  const groups = new Map<string, GroupStats | undefined>();
  for (const s of samples) if (!groups.has(monthOf(s.time))) groups.set(monthOf(s.time), groupAt(s));
  return { entry, settings, samples, groups, marks };
}
