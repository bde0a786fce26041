/**
 * `wearshift replay FILE`: the whole pipeline in-process on a history, no Redis: the same storing,
 * evaluation and incident code as the live worker, records taken in file order. Prints each sample's findings as its
 * last judgement gives them and every incident change, in time order; then the incidents as the verdict stands after the
 * last record with the time-to-limit forecasts of their evidence, and what each component cannot be judged on yet.
 */
import type { Command } from 'commander';
import { loadConfig } from '../../runtime/loadConfig.ts';
import { InputError } from '../../domain/errors.ts';
import { formatOf, readRecordFile } from '../../intake/fileRecords.ts';
import { replayRecords, type RefusedVerdict, type RejectedRecord, type TimelineLine } from '../../pipeline/replay.ts';
import { readSampleVerdictFile } from '../../intake/sampleVerdictFile.ts';
import { ADVISORY_LINE, processingTime, writeJsonLine } from '../output.ts';
import { FORECAST_CAUTION } from '../../domain/caution.ts';
import { formatTime, timeZoneNote } from '../../notify/format.ts';
import { ADVISORY_CAUTION, severityWords } from '../../notify/message.ts';
import type { Config } from '../../domain/config.ts';
import { subjectOf, type Disposition } from '../../domain/finding.ts';
import { describeState, sampleVerdictText, type Incident } from '../../incidents/model.ts';
import { componentView } from '../../pipeline/componentView.ts';
import { notJudgedYet, sharedReadinessLines } from '../../analysis/readiness.ts';
import type { MemoryStore } from '../../pipeline/memory/memoryStore.ts';
import { terminalText } from '../terminalText.ts';

interface ReplayCommandOptions {
  config?: string;
  format?: string;
  json?: boolean;
  now?: string;
  sampleVerdicts?: string;
}

export function registerReplay(program: Command): void {
  program
    .command('replay')
    .argument('<file>', 'CSV or JSONL, as for import')
    .option('--config <file>', 'configuration file (default: WEARSHIFT_CONFIG)')
    .option('--format <format>', 'csv or jsonl (default: from the file name)')
    .option(
      '--now <time>',
      'processing time, ISO 8601 with a time zone, e.g. 2026-02-01T12:00:00Z (default: now): every record arrives at it, as when the file is imported then, so a result sampled more than backfill.quietAfterDays before it is quiet backfill (nobody told, and an incident only seen so closes on its return to normal); a sample dated more than a day after it is rejected as lying in the future',
    )
    .option(
      '--sample-verdicts <file>',
      "responders' words on samples, JSON lines as `wearshift sample-verdicts` writes them from the live store ({unit, component, sampleId, verdict: confirmed | rejected | usual-rate, after?, by?, at?}): each given as the API takes it once the history has brought the sample it was given after (its after, else its own), so the verdict is the live store's after the same results and words",
    )
    .option('--json', 'JSON lines, one object each, told apart by "type": rejected, refused-verdict, finding, incident, verdict, readiness (below)')
    .addHelpText(
      'after',
      [
        '',
        'With --json, one JSON object per line, in this order:',
        '  {"type":"rejected",...}   a record refused, as it is read: line, sampleId, errors [{path, reason}]',
        '  {"type":"refused-verdict",...}  a word of --sample-verdicts not given: line, unit, component, sampleId,',
        '                            verdict, reason (no such sample, or the sample does not take it)',
        '  {"type":"finding",...}    a finding of a sample as its last judgement gives it, once: unit, component,',
        '                            measurand, rule, check (of a sampling finding), severity, disposition,',
        '                            sampleId, sampledAt, explanation, quiet (the measurand only files a sampling',
        '                            check of the whole sample: the verdict\'s evidence says "sample"); "revised":',
        '                            true when an earlier judgement of the sample (before a result sampled earlier',
        '                            arrived, or a correction) gave it otherwise or not at all, so incident lines',
        '                            may show it otherwise; one only an earlier judgement gave is not printed',
        '  {"type":"incident",...}   an incident change (a timeline entry): incidentId, change (opened, finding,',
        '                            notified, acknowledged, returned, closed, ...), at, incidentState,',
        '                            incidentSeverity ("none", with lastAnnouncedSeverity, once closed because',
        '                            its evidence was set aside); finding and incident lines together in',
        '                            sample-time order',
        '                            (a sample\'s findings before the incident changes of the same time)',
        '  {"type":"verdict",...}    each incident as it stands after the last record (withdrawn ones left out):',
        '                            incidentId, kind, state, severity, peakSeverity, evidence, closed, the',
        '                            time-to-limit forecast of an open one, and the caution as "advisory"',
        '  {"type":"readiness",...}  per component, what it cannot judge yet: unit, component, measurands',
        'Exit code 1 when a record was rejected or a word refused (the others are still replayed), 2 for a usage or',
        'input error (a line of --sample-verdicts that is not a word: nothing is replayed).',
      ].join('\n'),
    )
    .action(async (file: string, opts: ReplayCommandOptions) => {
      const format = formatOf(file, opts.format);
      const now = processingTime(opts.now);
      const config = loadConfig(opts.config ?? process.env.WEARSHIFT_CONFIG);
      const sampleVerdicts = opts.sampleVerdicts === undefined ? [] : readSampleVerdictFile(opts.sampleVerdicts);
      const { records, stream } = readRecordFile(file, format);
      const opened = new Promise<void>((resolve, reject) => {
        stream.once('open', () => resolve());
        stream.once('error', (e) => reject(new InputError(`${file}: ${e.message}`)));
      });
      await opened;
      const outcome = await replayRecords(records, {
        config,
        now,
        sampleVerdicts,
        onRejected: (r) => reportRejected(r, Boolean(opts.json)),
        onRefusedVerdict: (r) => reportRefusedVerdict(r, opts.sampleVerdicts!, Boolean(opts.json)),
      });
      const zone = config.display.timeZone;
      for (const line of outcome.timeline) {
        if (opts.json) writeJsonLine(line);
        else process.stdout.write(terminalText(`${readable(line, zone)}\n`));
      }
      // The verdict as it stands after the last record (what the live worker reaches with the same results), and what
      // each component cannot be judged on yet.
      const verdicts = outcome.store.incidents().filter((i) => i.closed?.how !== 'withdrawn').map(verdictLine);
      const readiness = await readinessLines(outcome.store, config);
      if (opts.json) {
        for (const v of verdicts) writeJsonLine({ ...v, advisory: ADVISORY_CAUTION });
        for (const r of readiness) writeJsonLine(r);
      } else {
        process.stdout.write(`\nincidents after the last record: ${verdicts.length}\n`);
        for (const v of verdicts) {
          process.stdout.write(terminalText(`  ${v.incidentId}  ${v.kind}  ${severityWords(v.severity, v.peakSeverity)}  ${v.state}\n`));
          if (v.closed === null) for (const f of v.forecast ?? []) process.stdout.write(terminalText(`      ${f.text}\n`));
        }
        if (verdicts.some((v) => v.closed === null && (v.forecast?.length ?? 0) > 0)) process.stdout.write(`  (${FORECAST_CAUTION})\n`);
        const waiting = readiness.flatMap((r) => sharedReadinessLines(r.measurands.filter(notJudgedYet)).map((line) => `  ${r.unit}/${r.component}  ${line}`));
        if (waiting.length > 0) process.stdout.write(terminalText(`\nnot judged yet:\n${waiting.join('\n')}\n`));
        process.stdout.write(`\n${timeZoneNote(zone)}\n${ADVISORY_LINE}\n`);
      }
      if (!opts.json) {
        const words = opts.sampleVerdicts === undefined ? '' : `, ${sampleVerdicts.length - outcome.refusedVerdicts} of ${sampleVerdicts.length} sample verdicts given`;
        process.stderr.write(terminalText(`${file}: ${outcome.records} records, ${outcome.rejected} rejected${words}, ${outcome.timeline.length} timeline lines\n`));
      }
      process.exitCode = outcome.rejected > 0 || outcome.refusedVerdicts > 0 ? 1 : 0;
    });
}

/** One line per incident as the verdict stands at the end. */
function verdictLine(i: Incident) {
  return {
    type: 'verdict' as const,
    incidentId: i.id,
    kind: i.kind,
    unit: i.unit,
    component: i.component,
    ...(i.measurand !== undefined && { measurand: i.measurand }),
    state: describeState(i),
    severity: i.severity,
    peakSeverity: i.peakSeverity,
    openedAt: i.openedAt,
    openedBySampleId: i.openedBySampleId,
    lastSampleId: i.lastSampleId,
    lastSampledAt: i.lastSampledAt,
    closed: i.closed?.how ?? null,
    evidence: i.evidence.map((f) => `${subjectOf(f)}:${f.rule}${f.check ? `:${f.check}` : ''}:${f.severity}`),
    /** Time-to-limit forecasts of the evidence's measurands as of the incident's latest evidence; they assume the present trend continues. */
    ...(i.forecast !== undefined && { forecast: i.forecast }),
  };
}

async function readinessLines(store: MemoryStore, config: Config) {
  const out = [];
  for (const c of await store.components()) {
    const view = await componentView(store, store, config, c);
    if (view !== undefined) out.push({ type: 'readiness' as const, unit: c.unit, component: c.component, measurands: view.readiness });
  }
  return out;
}

function reportRefusedVerdict(r: RefusedVerdict, file: string, json: boolean): void {
  if (json) return writeJsonLine({ type: 'refused-verdict', ...r });
  process.stderr.write(terminalText(`${file}:${r.line}: ${r.verdict} on sample ${r.sampleId} of ${r.unit}/${r.component} not given: ${r.reason}\n`));
}

function reportRejected(r: RejectedRecord, json: boolean): void {
  if (json) return writeJsonLine({ type: 'rejected', ...r });
  for (const e of r.errors) process.stderr.write(terminalText(`line ${r.line}${r.sampleId === undefined ? '' : ` (sampleId ${r.sampleId})`}: ${e.path || '(record)'}: ${e.reason}\n`));
}

/** A finding that opens nothing says so beside its severity: only an incident finding asks for a response. */
const DISPOSITION_MARK: Record<Disposition, string> = { incident: '', advisory: ' (advisory)', held: ' (held: sample in doubt)' };

function readable(line: TimelineLine, zone: string): string {
  const where = `${line.unit}/${line.component}`;
  if (line.type === 'finding') {
    const rule = `${subjectOf(line)} ${line.rule}${line.direction ? ` ${line.direction}` : ''}`;
    return `${formatTime(line.sampledAt, zone)}  ${where}  ${line.sampleId}  ${rule}  ${line.severity}${DISPOSITION_MARK[line.disposition]}${line.quiet ? ' (quiet)' : ''}${line.revised ? ' (revised)' : ''}  ${line.explanation}`;
  }
  const l = line as unknown as Record<string, unknown>;
  const detail =
    line.change === 'sample-verdict'
      ? `  ${sampleVerdictText(l as unknown as Parameters<typeof sampleVerdictText>[0])}`
      : typeof l.explanation === 'string'
        ? `  ${l.explanation}`
        : typeof l.how === 'string'
          ? `  ${l.how}`
          : '';
  // The incident's severity by the one rule; a finding entry says its own severity beside its change.
  const change = line.change === 'finding' && typeof l.severity === 'string' ? `finding (${l.severity})` : line.change;
  return `${formatTime(String(l.at), zone)}  ${where}  incident ${line.incidentId}  ${change}  incident ${line.incidentSeverity}  ${line.incidentState}${detail}`;
}
