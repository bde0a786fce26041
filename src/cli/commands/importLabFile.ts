/**
 * `wearshift import --map lab.yaml FILE`: a lab's own CSV or .xlsx export read through a mapping file,
 * streamed, with the same per-record report, progress bar and exit codes as a plain import. Errors name the
 * row, the column and the reason; cell text echoed to the terminal is shown with its control characters escaped,
 * as in a plain import. `--dry-run` prints the first mapped events so that the mapping can be
 * checked before anything is enqueued.
 */
import { statSync } from 'node:fs';
import { InputError } from '../../domain/errors.ts';
import { loadLabMapping } from '../../intake/labFiles/loadMapping.ts';
import type { LabIssue } from '../../intake/labFiles/labRecordReader.ts';
import { readLabFile } from '../../intake/labFiles/readLabFile.ts';
import type { ResultProducer } from '../../queue/producer.ts';
import { validateResult, type ValidatedRecord } from '../../intake/validate.ts';
import { writeJsonLine } from '../output.ts';
import { enqueueBatch, withEnqueuedSoFar } from '../enqueueBatch.ts';
import { importProgress } from '../importProgress.ts';
import { terminalText } from '../terminalText.ts';
import { confusableWarnings } from '../../intake/confusableNames.ts';
import { FileRevisions } from '../../pipeline/fileRevisions.ts';

export interface LabImportOptions {
  readonly map: string;
  readonly format?: string;
  readonly dryRun?: boolean;
  readonly json?: boolean;
  readonly batchSize: number;
  /** Enqueue as history jobs of `batchSize` results (see `ResultProducer.enqueueHistory`). Default false. */
  readonly history?: boolean;
  /** Mapped events printed in a dry run. */
  readonly show: number;
  /** The processing time for the "not in the future" check. */
  readonly now: number;
  readonly connect: () => Promise<ResultProducer>;
}

export function describeLabIssue(i: LabIssue): string {
  const where = [`row ${i.row}`, ...(i.column !== undefined ? [`column "${i.column}"`] : []), ...(i.field !== undefined ? [`(${i.field})`] : [])].join(', ').replace(', (', ' (');
  return `${where}: ${i.reason}`;
}

export async function importLabFile(file: string, opts: LabImportOptions): Promise<number> {
  const mapping = loadLabMapping(opts.map);
  let size;
  try {
    size = statSync(file).size;
  } catch (e) {
    throw new InputError((e as Error).message);
  }
  const { records, stream } = readLabFile(file, mapping, { ...(opts.format !== undefined && { format: opts.format }), validate: (e) => validateResult(e, { now: opts.now }) });
  const producer = opts.dryRun ? undefined : await opts.connect();
  const bar = importProgress(size, opts.json);
  const counts = { records: 0, accepted: 0, rejected: 0, enqueued: 0, duplicates: 0, shown: 0 };
  // Across the whole file, not per batch: a repeat is taken once, the same identity with other content refused.
  const revisions = new FileRevisions('row');
  // Cells from the lab's file are echoed in reasons: shown with their control characters escaped, never acted on.
  const say = (text: string) => (bar ? bar.log(terminalText(text)) : process.stderr.write(`${terminalText(text)}\n`));
  // Each sample is validated once, by the reader (so that an error names its row and column); the producer only
  // enqueues, and refuses a sampleId and revision already stored with other content.
  let batch: ValidatedRecord[] = [];
  const reject = (row: number, sampleId: string | undefined, issues: readonly LabIssue[]) => {
    counts.rejected += 1;
    if (opts.json) writeJsonLine({ type: 'rejected', row, ...(sampleId !== undefined && { sampleId }), errors: issues });
    else for (const i of issues) say(`${describeLabIssue(i)}${sampleId === undefined ? '' : ` [sampleId ${sampleId}]`}`);
  };
  const flush = async () => {
    if (producer === undefined) return;
    await enqueueBatch(
      producer,
      batch,
      counts,
      (row, sampleId, errors) => reject(row, sampleId, errors.map((e) => ({ row, ...(e.path !== '' && { field: e.path }), reason: e.reason }))),
      opts.history === true,
    );
    batch = [];
  };
  try {
    for await (const r of records) {
      counts.records += 1;
      const repeat = r.status === 'rejected' ? undefined : revisions.check(r.row, r.sample);
      if (r.status === 'rejected') reject(r.row, r.sampleId, r.issues);
      else if (repeat?.kind === 'conflict') reject(r.row, r.sample.sampleId, [{ row: r.row, field: 'revision', reason: repeat.reason }]);
      else if (repeat?.kind === 'duplicate') {
        // The same result again, as a redelivery: accepted, and enqueued once (with the earlier row).
        counts.accepted += 1;
        counts.duplicates += 1;
        if (opts.json) writeJsonLine({ type: 'duplicate', row: r.row, sampleId: r.sample.sampleId, of: repeat.of });
        else say(`row ${r.row} (sampleId ${r.sample.sampleId}): repeats row ${repeat.of} (same sampleId, revision and content): taken once`);
      } else {
        counts.accepted += 1;
        for (const w of confusableWarnings(r.sample)) {
          if (opts.json) writeJsonLine({ type: 'warning', row: r.row, sampleId: r.sample.sampleId, warning: w });
          else say(`row ${r.row} (sampleId ${r.sample.sampleId}): warning: ${w.path}: ${w.reason}`);
        }
        if (opts.dryRun && counts.shown < opts.show) {
          counts.shown += 1;
          if (opts.json) writeJsonLine({ type: 'mapped', row: r.row, event: r.event });
          else process.stdout.write(terminalText(`row ${r.row} → ${JSON.stringify(r.event)}\n`));
        }
        if (producer !== undefined) {
          batch.push({ index: r.row, event: r.event, sample: r.sample });
          if (batch.length >= opts.batchSize) await flush();
        }
      }
      bar?.update(stream.bytesRead, counts);
    }
    await flush();
  } catch (e) {
    throw withEnqueuedSoFar(e, counts);
  } finally {
    stream.destroy();
    bar?.stop(size, counts);
    await producer?.close();
  }
  const summary = { type: 'summary', file, map: opts.map, records: counts.records, accepted: counts.accepted, rejected: counts.rejected, enqueued: counts.enqueued, duplicates: counts.duplicates, dryRun: Boolean(opts.dryRun) };
  if (opts.json) writeJsonLine(summary);
  else {
    const repeats = counts.duplicates === 0 ? '' : `; ${counts.duplicates} ${counts.duplicates === 1 ? 'repeats an earlier row' : 'repeat earlier rows'}, taken once`;
    process.stdout.write(
      opts.dryRun
        ? terminalText(`${file}: ${counts.accepted} valid, ${counts.rejected} rejected of ${counts.records} samples${repeats} (dry run: nothing enqueued)\n`)
        : terminalText(`${file}: ${counts.enqueued} enqueued, ${counts.rejected} rejected of ${counts.records} samples${repeats}\n`),
    );
  }
  return counts.rejected > 0 ? 1 : 0;
}
