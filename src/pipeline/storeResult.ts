/**
 * The first step of processing, shared by the results worker, replay and backtest: validate the record, find its
 * group and store it. Validation failures are InvalidResultError (the worker turns them into an unrecoverable job
 * failure: retrying cannot fix the data).
 */
import type { Config } from '../domain/config.ts';
import type { FieldIssue, Sample } from '../domain/event.ts';
import { resolveSettings } from '../domain/settings.ts';
import { claimedSampleId, describeIssues, validateResult } from '../intake/validate.ts';
import type { ComponentStore, StoreOutcome } from './ports.ts';

export class InvalidResultError extends Error {
  override readonly name = 'InvalidResultError';
  constructor(
    readonly issues: readonly FieldIssue[],
    readonly sampleId?: string,
  ) {
    super(`invalid result${sampleId === undefined ? '' : ` (sampleId ${sampleId})`}: ${describeIssues(issues)}`);
  }
}

export interface StoredResult {
  readonly sample: Sample;
  readonly group: string;
  readonly outcome: StoreOutcome;
}

/** @param now processing time (epoch ms): validation refuses dates in the future, and it is the result's arrival time. */
export async function storeResult(store: Pick<ComponentStore, 'store'>, config: Config, record: unknown, now: number): Promise<StoredResult> {
  const parsed = validateResult(record, { now });
  if (!parsed.ok) throw new InvalidResultError(parsed.issues, claimedSampleId(record));
  return storeSample(store, config, parsed.sample, now);
}

/** Stores samples already validated (with the same clock) in one step: finds each one's group and stores them. */
export async function storeSamples(store: Pick<ComponentStore, 'storeMany'>, config: Config, samples: readonly Sample[], now: number): Promise<StoredResult[]> {
  const items = samples.map((sample) => ({ sample, group: resolveSettings(config, sample).group }));
  const outcomes = await store.storeMany(items, now);
  return items.map((it, i) => ({ ...it, outcome: outcomes[i]! }));
}

/** Stores a sample already validated (with the same clock): finds its group and stores it. */
export async function storeSample(store: Pick<ComponentStore, 'store'>, config: Config, sample: Sample, now: number): Promise<StoredResult> {
  const group = resolveSettings(config, sample).group;
  const outcome = await store.store(sample, group, now);
  return { sample, group, outcome };
}
