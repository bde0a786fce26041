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
  const sample = parsed.sample;
  const group = resolveSettings(config, sample).group;
  const outcome = await store.store(sample, group, now);
  return { sample, group, outcome };
}
