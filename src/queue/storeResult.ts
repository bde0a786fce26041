/**
 * The first step of processing, shared by the results worker and replay: validate the record, place it in
 * its group and store it. Validation failures are InvalidResultError (the worker turns them into an
 * unrecoverable job failure: retrying cannot fix the data).
 */
import type { Config } from '../domain/config.ts';
import type { FieldIssue, Sample } from '../domain/event.ts';
import { resolveSettings } from '../domain/settings.ts';
import { claimedSampleId, describeIssues, validateResult } from '../intake/validate.ts';
import { bandContributions } from '../storage/populationSums.ts';
import type { HistoryStore, StoreOutcome } from '../storage/storage.ts';

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

export async function storeResult(store: HistoryStore, config: Config, record: unknown, now: number): Promise<StoredResult> {
  const parsed = validateResult(record, { now });
  if (!parsed.ok) throw new InvalidResultError(parsed.issues, claimedSampleId(record));
  const sample = parsed.sample;
  const settings = resolveSettings(config, sample);
  const outcome = await store.store(sample, {
    group: settings.group,
    contributions: bandContributions(sample, settings.population),
    keepValues: settings.population.method === 'percentile',
  });
  return { sample, group: settings.group, outcome };
}
