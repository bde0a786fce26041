/**
 * `wearshift import FILE`: validates a CSV or JSONL file of results line by line and enqueues the valid
 * ones for the workers. Every rejected line is reported with its number, its sampleId, the field and the
 * reason; the exit code is 1 when any line was rejected. `--dry-run` only validates (no Redis needed).
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
    .option('--json', 'JSON lines: one per rejected line, then a summary')
    .option('--history', 'a history of old results: stored and evaluated month by month in jobs of --batch-size results, each component once per month of a job instead of once per result; best with the file in sampling-time order, and faster on workers started with --history-threads')
    .option('--batch-size <n>', 'records enqueued per round trip; with --history, results per history job (default 500; with --history 10000)')
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
  const counts = { lines: 0, accepted: 0, rejected: 0, enqueued: 0, noOilChanged: 0 };
  const report = (line: number, sampleId: string | undefined, issues: readonly FieldIssue[]) => {
    counts.rejected += 1;
    if (opts.json) return writeJsonLine({ type: 'rejected', line, ...(sampleId !== undefined && { sampleId }), errors: issues });
    for (const i of issues) {
      // Values from the file are echoed in reasons: shown with their control characters escaped, never acted on.
      const text = terminalText(`line ${line}${sampleId === undefined ? '' : ` (sampleId ${sampleId})`}: ${i.path || '(record)'}: ${i.reason}`);
      if (bar) bar.log(text);
      else process.stderr.write(`${text}\n`);
    }
  };
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
        if (parsed.ok) {
          counts.accepted += 1;
          for (const w of confusableWarnings(parsed.sample)) {
            if (opts.json) writeJsonLine({ type: 'warning', line: r.line, sampleId: parsed.sample.sampleId, warning: w });
            else {
              const text = terminalText(`line ${r.line} (sampleId ${parsed.sample.sampleId}): warning: ${w.path}: ${w.reason}`);
              if (bar) bar.log(text);
              else process.stderr.write(`${text}\n`);
            }
          }
          // Said in the summary, not guessed silently: a record without oilChanged is taken as "no oil change".
          if (typeof r.record === 'object' && r.record !== null && !('oilChanged' in r.record)) counts.noOilChanged += 1;
          // A dry run keeps nothing: memory stays flat however long the file.
          if (producer !== undefined) batch.push({ index: r.line, event: r.record, sample: parsed.sample });
          if (batch.length >= batchSize) await flush();
        } else report(r.line, claimedSampleId(r.record), parsed.issues);
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
    withoutOilChanged: counts.noOilChanged,
    dryRun: Boolean(opts.dryRun),
    ...(redis !== undefined && { redis }),
  };
  if (opts.json) writeJsonLine(summary);
  else {
    process.stdout.write(
      opts.dryRun
        ? terminalText(`${file}: ${counts.accepted} valid, ${counts.rejected} rejected of ${counts.lines} records (dry run: nothing enqueued)\n`)
        : terminalText(`${file}: ${counts.enqueued} enqueued, ${counts.rejected} rejected of ${counts.lines} records\n`),
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
  const producer = createResultProducer({ connection: redis, prefix, partitions });
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
