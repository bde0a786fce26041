/**
 * `wearshift import --map lab.yaml FILE`: a lab's own CSV or .xlsx export read through a mapping file,
 * streamed, with the same per-record report, progress bar and exit codes as a plain import. Errors name the
 * row, the column and the reason. `--dry-run` prints the first mapped events so that the mapping can be
 * checked before anything is enqueued.
 */
import { statSync } from 'node:fs';
import { MultiBar, Presets } from 'cli-progress';
import { InputError } from '../../domain/errors.ts';
import { loadLabMapping } from '../../intake/labFiles/loadMapping.ts';
import type { LabIssue } from '../../intake/labFiles/labRecordReader.ts';
import { readLabFile } from '../../intake/labFiles/readLabFile.ts';
import type { ResultProducer } from '../../queue/producer.ts';
import { validateResult, type ValidatedRecord } from '../../intake/validate.ts';
import { writeJsonLine } from '../output.ts';
import { enqueueBatch } from '../enqueueBatch.ts';
import { terminalText } from '../terminalText.ts';

export interface LabImportOptions {
  readonly map: string;
  readonly format?: string;
  readonly dryRun?: boolean;
  readonly json?: boolean;
  readonly batchSize: number;
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
  const bar = process.stderr.isTTY && !opts.json ? new MultiBar({ format: ' {bar} {percentage}% | {value}/{total} bytes | {accepted} accepted, {rejected} rejected', hideCursor: true, stream: process.stderr }, Presets.shades_classic) : undefined;
  const progress = bar?.create(size, 0, { accepted: 0, rejected: 0 });
  const counts = { records: 0, accepted: 0, rejected: 0, enqueued: 0, shown: 0 };
  // Cell text quoted in a message is shown escaped (terminalText.ts): nothing in a lab file acts on the terminal.
  const say = (text: string) => (bar ? bar.log(terminalText(`${text}\n`)) : process.stderr.write(terminalText(`${text}\n`)));
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
    await enqueueBatch(producer, batch, counts, (row, sampleId, errors) =>
      reject(row, sampleId, errors.map((e) => ({ row, ...(e.path !== '' && { field: e.path }), reason: e.reason }))),
    );
    batch = [];
  };
  try {
    for await (const r of records) {
      counts.records += 1;
      if (r.status === 'rejected') reject(r.row, r.sampleId, r.issues);
      else {
        counts.accepted += 1;
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
      progress?.update(stream.bytesRead, { accepted: counts.accepted, rejected: counts.rejected });
    }
    await flush();
  } finally {
    stream.destroy();
    progress?.update(size, { accepted: counts.accepted, rejected: counts.rejected });
    bar?.stop();
    await producer?.close();
  }
  const summary = { type: 'summary', file, map: opts.map, records: counts.records, accepted: counts.accepted, rejected: counts.rejected, enqueued: counts.enqueued, dryRun: Boolean(opts.dryRun) };
  if (opts.json) writeJsonLine(summary);
  else
    process.stdout.write(
      opts.dryRun
        ? `${file}: ${counts.accepted} valid, ${counts.rejected} rejected of ${counts.records} samples (dry run: nothing enqueued)\n`
        : `${file}: ${counts.enqueued} enqueued, ${counts.rejected} rejected of ${counts.records} samples\n`,
    );
  return counts.rejected > 0 ? 1 : 0;
}
