/**
 * `wearshift import FILE`: validates a CSV or JSONL file of results line by line and enqueues the valid
 * ones for the workers. Every rejected line is reported with its number, its sampleId, the field and the
 * reason — a line with an earlier line's sampleId and revision but other content too, naming both; the exit code is
 * 1 when any line was rejected. `--dry-run` only validates (no Redis needed).
 */
import { statSync } from 'node:fs';
import type { Command } from 'commander';
import { loadConfig } from '../../runtime/loadConfig.ts';
import { InputError } from '../../domain/errors.ts';
import type { FieldIssue } from '../../domain/event.ts';
import { formatOf, readRecordFile } from '../../intake/fileRecords.ts';
import { createResultProducer, type ResultProducer } from '../../queue/producer.ts';
import { DEFAULT_HISTORY_JOB_SIZE } from '../../queue/queues.ts';
import { claimedSampleId, validateResult, type ValidatedRecord } from '../../intake/validate.ts';
import { closeQuietly, connectForCommand, redisTarget, type RedisTarget } from '../../redis/connection.ts';
import { redisChoice, writeJsonLine } from '../output.ts';
import { importLabFile } from './importLabFile.ts';
import { enqueueBatch, withEnqueuedSoFar } from '../enqueueBatch.ts';
import { importProgress } from '../importProgress.ts';
import { terminalText } from '../terminalText.ts';
import { confusableWarnings } from '../../intake/confusableNames.ts';
import { FileRevisions } from '../../pipeline/fileRevisions.ts';

interface ImportOptions {
  config?: string;
  format?: string;
  dryRun?: boolean;
  json?: boolean;
  batchSize?: string;
  history?: boolean;
  map?: string;
  show: string;
}

export function registerImport(program: Command): void {
  program
    .command('import')
    .argument('<file>', 'CSV (event field names as columns, readings as extra columns) or JSONL (one event per line)')
    .option('--config <file>', 'configuration file (default: WEARSHIFT_CONFIG)')
    .option('--format <format>', 'csv or jsonl; with --map csv or xlsx (default: from the file name)')
    .option('--map <file>', "a lab mapping (YAML) that reads the lab's own CSV or .xlsx export: column names, units, dates, layout")
    .option('--show <n>', 'with --map and --dry-run: mapped events printed to check the mapping', '3')
    .option('--dry-run', 'validate only; nothing is enqueued and Redis is not needed')
    .option('--json', 'JSON lines: one per rejected line (type rejected), repeated line (duplicate) and warning, then a summary')
    .option('--history', 'a history of old results: stored and evaluated month by month in jobs of --batch-size results, each component once per month of a job instead of once per result; best with the file in sampling-time order, and faster on workers started with --history-threads')
    .option('--batch-size <n>', 'records enqueued per round trip; with --history, results per history job (default 500; with --history 10000)')
    .addHelpText(
      'after',
      '\nA line with the unit, component, sampleId and revision of an earlier line of the file is taken once when its content is the same, and rejected, naming both lines, when it differs: a correction needs a higher revision. Exit code 1 when any line was rejected (the others are still enqueued), 2 for a usage or input error (a file or mapping that cannot be read, Redis out of reach or not answering within 10 s of connecting).',
    )
    .action(async (file: string, opts: ImportOptions) => {
      process.exitCode = await importFile(file, opts);
    });
}

async function importFile(file: string, opts: ImportOptions): Promise<number> {
  const history = opts.history === true;
  const batchSize = Number(opts.batchSize ?? (history ? DEFAULT_HISTORY_JOB_SIZE : 500));
  if (!Number.isInteger(batchSize) || batchSize < 1) throw new InputError(`--batch-size: expected a whole number from 1, got "${opts.batchSize}"`);
  if (opts.map !== undefined) {
    const show = Number(opts.show);
    if (!Number.isInteger(show) || show < 0) throw new InputError(`--show: expected a whole number from 0, got "${opts.show}"`);
    const config = loadConfig(opts.config ?? process.env.WEARSHIFT_CONFIG);
    announceRedis(config, opts);
    return importLabFile(file, {
      map: opts.map,
      ...(opts.format !== undefined && { format: opts.format }),
      ...(opts.dryRun !== undefined && { dryRun: opts.dryRun }),
      ...(opts.json !== undefined && { json: opts.json }),
      batchSize,
      history,
      show,
      now: Date.now(),
      connect: () => connectProducer(redisTarget(config), config.redis.prefix, config.redis.partitions),
    });
  }
  const format = formatOf(file, opts.format);
  let size;
  try {
    size = statSync(file).size;
  } catch (e) {
    throw new InputError((e as Error).message);
  }
  const config = loadConfig(opts.config ?? process.env.WEARSHIFT_CONFIG);
  const redis = announceRedis(config, opts);
  const producer = opts.dryRun ? undefined : await connectProducer(redisTarget(config), config.redis.prefix, config.redis.partitions);
  const { records, stream } = readRecordFile(file, format);
  const bar = importProgress(size, opts.json);
  const counts = { lines: 0, accepted: 0, rejected: 0, enqueued: 0, duplicates: 0, noOilChanged: 0 };
  const say = (text: string) => (bar ? bar.log(text) : process.stderr.write(`${text}\n`));
  const report = (line: number, sampleId: string | undefined, issues: readonly FieldIssue[]) => {
    counts.rejected += 1;
    if (opts.json) return writeJsonLine({ type: 'rejected', line, ...(sampleId !== undefined && { sampleId }), errors: issues });
    // Values from the file are echoed in reasons: shown with their control characters escaped, never acted on.
    for (const i of issues) say(terminalText(`line ${line}${sampleId === undefined ? '' : ` (sampleId ${sampleId})`}: ${i.path || '(record)'}: ${i.reason}`));
  };
  // Across the whole file, not per batch: a later line with an earlier one's sampleId and revision is a repeat (taken
  // once) or, with other content, a conflict the store would refuse.
  const revisions = new FileRevisions('line');
  // Each record is validated once, here; the producer only enqueues (and refuses a revision conflict).
  let batch: ValidatedRecord[] = [];
  const flush = async () => {
    if (producer === undefined) return;
    await enqueueBatch(producer, batch, counts, report, history);
    batch = [];
  };
  try {
    for await (const r of records) {
      counts.lines += 1;
      if ('issues' in r) report(r.line, r.sampleId, r.issues);
      else {
        const parsed = validateResult(r.record, { now: Date.now() });
        const repeat = parsed.ok ? revisions.check(r.line, parsed.sample) : undefined;
        if (!parsed.ok) report(r.line, claimedSampleId(r.record), parsed.issues);
        else if (repeat?.kind === 'conflict') report(r.line, parsed.sample.sampleId, [{ path: 'revision', reason: repeat.reason }]);
        else if (repeat?.kind === 'duplicate') {
          // The same result again, as a redelivery: accepted, and enqueued once (with the earlier line).
          counts.accepted += 1;
          counts.duplicates += 1;
          if (opts.json) writeJsonLine({ type: 'duplicate', line: r.line, sampleId: parsed.sample.sampleId, of: repeat.of });
          else say(terminalText(`line ${r.line} (sampleId ${parsed.sample.sampleId}): repeats line ${repeat.of} (same sampleId, revision and content): taken once`));
        } else {
          counts.accepted += 1;
          for (const w of confusableWarnings(parsed.sample)) {
            if (opts.json) writeJsonLine({ type: 'warning', line: r.line, sampleId: parsed.sample.sampleId, warning: w });
            else say(terminalText(`line ${r.line} (sampleId ${parsed.sample.sampleId}): warning: ${w.path}: ${w.reason}`));
          }
          // Said in the summary, not guessed silently: a record without oilChanged is taken as "no oil change".
          if (typeof r.record === 'object' && r.record !== null && !('oilChanged' in r.record)) counts.noOilChanged += 1;
          // A dry run keeps no record, only each result's digest for the repeats above.
          if (producer !== undefined) batch.push({ index: r.line, event: r.record, sample: parsed.sample });
          if (batch.length >= batchSize) await flush();
        }
      }
      bar?.update(stream.bytesRead, counts);
    }
    await flush();
  } catch (e) {
    throw withEnqueuedSoFar(e, counts);
  } finally {
    bar?.stop(size, counts);
    await producer?.close();
  }
  const summary = {
    type: 'summary',
    file,
    records: counts.lines,
    accepted: counts.accepted,
    rejected: counts.rejected,
    enqueued: counts.enqueued,
    duplicates: counts.duplicates,
    withoutOilChanged: counts.noOilChanged,
    dryRun: Boolean(opts.dryRun),
    ...(redis !== undefined && { redis }),
  };
  if (opts.json) writeJsonLine(summary);
  else {
    const repeats = counts.duplicates === 0 ? '' : `; ${counts.duplicates} ${counts.duplicates === 1 ? 'repeats an earlier line' : 'repeat earlier lines'}, taken once`;
    process.stdout.write(
      opts.dryRun
        ? terminalText(`${file}: ${counts.accepted} valid, ${counts.rejected} rejected of ${counts.lines} records${repeats} (dry run: nothing enqueued)\n`)
        : terminalText(`${file}: ${counts.enqueued} enqueued, ${counts.rejected} rejected of ${counts.lines} records${repeats}\n`),
    );
    if (counts.noOilChanged > 0) {
      process.stdout.write(`${counts.noOilChanged} accepted ${counts.noOilChanged === 1 ? 'record gives' : 'records give'} no oilChanged (empty or missing): taken as no oil change. Write true where the oil was changed.\n`);
    }
  }
  return counts.rejected > 0 ? 1 : 0;
}

async function connectProducer(target: RedisTarget, prefix: string, partitions: number): Promise<ResultProducer> {
  const redis = await connectForCommand(target).catch((e: Error) => {
    throw new InputError(`${e.message}; use --dry-run to validate without Redis`);
  });
  const producer = createResultProducer({ connection: redis, prefix, partitions, origin: 'import' });
  return {
    add: (events) => producer.add(events),
    enqueue: (records) => producer.enqueue(records),
    enqueueHistory: (records, perJob) => producer.enqueueHistory(records, perJob),
    async close() {
      await producer.close();
      await closeQuietly(redis);
    },
  };
}

/**
 * Which Redis and key prefix the records go to (undefined with --dry-run, which needs no Redis), said on stderr unless
 * the output is JSON lines.
 */
function announceRedis(config: ReturnType<typeof loadConfig>, opts: Pick<ImportOptions, 'dryRun' | 'json'>): string | undefined {
  const redis = opts.dryRun ? undefined : redisChoice(config);
  if (redis !== undefined && !opts.json) process.stderr.write(`wearshift: ${redis}\n`);
  return redis;
}
