/**
 * Enqueues one batch of records an import already validated, for `import` and `import --map`: the producer only
 * refuses a sampleId and revision already stored with other content, which is reported like any other rejection.
 */
import { InputError } from '../domain/errors.ts';
import type { FieldIssue } from '../domain/event.ts';
import type { ValidatedRecord } from '../intake/validate.ts';
import type { ResultProducer } from '../queue/producer.ts';
import { FileReadError } from '../intake/fileRecords.ts';

export interface ImportCounts {
  accepted: number;
  enqueued: number;
}

/**
 * `refused` gets the record's line or row (its index), its sampleId and the reasons. With `history` the batch goes
 * as one history job (stored and evaluated month by month) instead of one job per record.
 */
export async function enqueueBatch(
  producer: ResultProducer,
  batch: readonly ValidatedRecord[],
  counts: ImportCounts,
  refused: (index: number, sampleId: string | undefined, errors: readonly FieldIssue[]) => void,
  history = false,
): Promise<void> {
  if (batch.length === 0) return;
  let outcomes;
  try {
    outcomes = history ? await producer.enqueueHistory(batch, batch.length) : await producer.enqueue(batch);
  } catch (e) {
    throw new InputError(`Redis refused the results after ${counts.enqueued} were enqueued: ${(e as Error).message}. Import the file again once Redis is back: results already stored are recognised and kept once.`);
  }
  for (const o of outcomes) {
    if (o.status === 'accepted') counts.enqueued += 1;
    else {
      counts.accepted -= 1;
      refused(o.index, o.sampleId, o.errors ?? []);
    }
  }
}

/** A file that could not be read to its end says what was enqueued before: those results are in, and stay once if imported again. */
export function withEnqueuedSoFar(e: unknown, counts: ImportCounts): unknown {
  if (!(e instanceof FileReadError) || counts.enqueued === 0) return e;
  return new FileReadError(`${e.message}; the ${counts.enqueued} results read before it were enqueued (a result imported again is stored once)`);
}
