/**
 * `wearshift incidents list|show|ack|shelve|unshelve|resolve|note`: the on-call engineer's commands, straight
 * against the Redis incident store. Messages that an action causes go to the outbox, which the worker sends; the
 * action is announced on the live channel, as the API's actions are, so that open boards show it.
 */
import { FORECAST_CAUTION } from '../../domain/caution.ts';
import { subjectOf } from '../../domain/finding.ts';
import type { Command } from 'commander';
import type { Config } from '../../domain/config.ts';
import { InputError } from '../../domain/errors.ts';
import type { IncidentAction } from '../../incidents/applyAction.ts';
import { MAX_LIST_LIMIT } from '../../incidents/listFilter.ts';
import { decodeCursor, encodeCursor, IncidentListQuerySchema } from '../../incidents/listPage.ts';
import { closureText, describeState, mergedTimeline, notifiedTargetsText, sampleVerdictText, type Incident, type IncidentSummary, type NotifiedEntry, type TimelineEntry } from '../../incidents/model.ts';
import { incidentRules } from '../../incidents/policy.ts';
import type { RedisConnection } from '../../redis/connection.ts';
import { withRedis } from '../commandRedis.ts';
import { announcingActions } from '../../http/eventHub.ts';
import { livePublisher } from '../../runtime/liveBridge.ts';
import { createLogger } from '../../telemetry/logger.ts';
import { RedisIncidents } from '../../redis/redisIncidents.ts';
import { formatTime, timeZoneNote } from '../../notify/format.ts';
import { ADVISORY_CAUTION, bySeverity, severityWords } from '../../notify/message.ts';
import { formatTable, writeJsonLine, zonedTime } from '../output.ts';
import { terminalText } from '../terminalText.ts';

interface CommonOptions {
  config?: string;
  json?: boolean;
}

async function withStore<T>(opts: CommonOptions, work: (store: RedisIncidents, config: Config, redis: RedisConnection) => Promise<T>): Promise<T> {
  // Which Redis goes to stderr: the output itself stays the incidents (and one JSON object per line with --json).
  return withRedis(opts, (redis, config) => work(new RedisIncidents(redis, { rules: incidentRules(config), prefix: config.redis.prefix, partitions: config.redis.partitions }), config, redis));
}

function instant(name: string) {
  return (raw: string): Date => new Date(zonedTime(name, raw));
}

/** What the evidence is about: its measurands, `sample` for a sampling check that judges the whole sample. */
function measurands(i: IncidentSummary): string {
  return [...new Set(i.evidence.map((f) => subjectOf(f)))].join(',');
}

/**
 * The list, and when it was cut at --limit, how many it shows of how many: after the table, or on stderr with --json
 * (stdout stays one incident per line).
 */
/** `next`: the cursor of the page after this one, when there is one. `before`: incidents on the pages before this one. */
function printList(list: IncidentSummary[], json: boolean, zone: string, total: number, next: string | null, before: boolean): void {
  const more = next === null ? '' : `; the next page: --cursor ${next} (with the same --state, --severity, --unit and --group)`;
  const shown = before ? `showing ${list.length} more of ${total} incidents` : `showing ${list.length} of ${total} incidents`;
  const cut =
    next !== null || before
      ? `${shown}${more}${next === null ? ' (the last page)' : `, or narrow the list with --state, --severity, --unit or --group; --limit up to ${MAX_LIST_LIMIT}`}`
      : undefined;
  if (json) {
    list.forEach((i) => writeJsonLine({ ...i, advisory: ADVISORY_CAUTION }));
    if (cut !== undefined) process.stderr.write(`wearshift: ${cut}\n`);
    return;
  }
  if (list.length === 0) return void process.stdout.write('no incidents match\n');
  const rows = list.map((i) => [i.id, severityWords(i.severity, i.peakSeverity), describeState(i, (t) => formatTime(t, zone)), measurands(i), formatTime(i.openedAt, zone), i.lastSampleId]);
  process.stdout.write(terminalText(formatTable(['incident', 'severity', 'state', 'measurands', 'opened (sample)', 'last sample'], rows)));
  if (cut !== undefined) process.stdout.write(`${cut}\n`);
  process.stdout.write(`\n${timeZoneNote(zone)}\n${ADVISORY_CAUTION}\n`);
}

function entryText(e: TimelineEntry | NotifiedEntry, zone: string): string {
  switch (e.kind) {
    case 'opened':
      return `opened at sample ${e.sampleId}, ${e.severity}`;
    case 'finding':
      return `${subjectOf(e)} ${e.rule}${e.direction ? ` ${e.direction}` : ''}: ${e.change === 'cleared' ? 'cleared' : e.change === 'raised' ? `raised, ${e.severity}` : `${e.previousSeverity} → ${e.severity}`} (sample ${e.sampleId})${e.explanation ? ` — ${e.explanation}` : ''}`;
    case 'returned':
      return `returned to normal (sample ${e.sampleId})`;
    case 'active-again':
      return `${e.reopened ? 'reopened' : 'active again'} (sample ${e.sampleId})`;
    case 'acknowledged':
      return `acknowledged by ${e.by}${e.credential ? ` (${e.credential})` : e.recipient ? ` (link sent to ${e.recipient})` : ''}${e.note ? `: ${e.note}` : ''}`;
    case 'unacknowledged':
      return `acknowledgement withdrawn: ${e.reason}`;
    case 'shelved':
      return `shelved by ${e.by} until ${formatTime(e.until, zone)}: ${e.reason}`;
    case 'unshelved':
      return e.by ? `unshelved by ${e.by}` : 'shelving ended';
    case 'closed':
      if (e.how === 'sample-verdict') return closureText(e);
      return `closed (${e.how})${e.by ? ` by ${e.by}` : ''}${e.note ? `: ${e.note}` : ''}`;
    case 'note':
      return `note by ${e.by}: ${e.note}`;
    case 'sample-verdict':
      return sampleVerdictText(e);
    case 'notified':
      return `${e.type.replace('wearshift.incident.', '')} → ${e.targets.length > 0 ? notifiedTargetsText(e) : 'nobody'} (${e.reason})`;
  }
}

function printIncident(i: Incident, json: boolean, zone: string): void {
  if (json) return writeJsonLine({ ...i, advisory: ADVISORY_CAUTION });
  const lines = [
    `${i.id}`,
    `  ${i.unit} / ${i.component}${i.measurand ? ` / ${i.measurand}` : ''} · group ${i.group}`,
    `  ${severityWords(i.severity, i.peakSeverity)} · ${describeState(i, (t) => formatTime(t, zone))}`,
    `  opened ${formatTime(i.openedAt, zone)} at sample ${i.openedBySampleId}; last sample ${i.lastSampleId} (${formatTime(i.lastSampledAt, zone)})`,
    ...(i.escalation.policy
      ? [`  escalation: policy ${i.escalation.policy}, tier ${Math.max(0, i.escalation.reachedTier)}${i.escalation.dueAt ? `, next check ${formatTime(i.escalation.dueAt, zone)}` : ''}`]
      : []),
    '',
    'evidence (most severe first)',
    ...bySeverity(i.evidence).map((f) => `  ${subjectOf(f)} ${f.rule} ${f.severity}: ${f.explanation}`),
    ...((i.forecast?.length ?? 0) > 0 ? ['', 'time to limit', ...i.forecast!.map((f) => `  ${f.text}`), `  (${FORECAST_CAUTION})`] : []),
    '',
    'timeline',
    ...mergedTimeline(i).map((e) => `  ${formatTime(e.at, zone)}  ${entryText(e, zone)}`),
    '',
    timeZoneNote(zone),
    ADVISORY_CAUTION,
  ];
  // Each line made safe on its own: a line break inside a note or name must not start a line of its own either.
  process.stdout.write(`${lines.map((l) => terminalText(l).replace(/\n/g, '\\n')).join('\n')}\n`);
}

type ActionBuilder = (id: string, opts: Record<string, unknown>, now: Date) => IncidentAction;

function actionCommand(parent: Command, name: string, description: string, configure: (c: Command) => Command, build: ActionBuilder): void {
  configure(parent.command(`${name} <id>`).description(description).requiredOption('--by <name>', 'who acts'))
    .option('--config <file>', 'configuration file (default: WEARSHIFT_CONFIG)')
    .option('--json', 'print the incident as one JSON line, with the caution as its advisory field')
    .action(async (id: string, opts: CommonOptions & Record<string, unknown>) => {
      const { incident, zone } = await withStore(opts, async (store, config, redis) => {
        // Announced on the live channel as the API announces its actions, so that every open board shows it at once.
        // A failed announcement is logged at debug level (LOG_LEVEL=debug): the action itself is stored either way.
        const live = livePublisher(redis, config.redis.prefix, createLogger({ level: process.env.LOG_LEVEL ?? 'warn' }));
        const result = await announcingActions(store, live).applyAction(build(id, opts, new Date()));
        // The publisher sends at the end of this turn of the event loop: one turn later its PUBLISH is on the connection,
        // ahead of the QUIT that closes it.
        await new Promise((resolve) => setImmediate(resolve));
        return { ...result, zone: config.display.timeZone };
      });
      if (opts.json) writeJsonLine({ ...incident, advisory: ADVISORY_CAUTION });
      else process.stdout.write(`${terminalText(incident.id)}: ${describeState(incident, (t) => formatTime(t, zone))}\n${ADVISORY_CAUTION}\n`);
    });
}

export function registerIncidents(program: Command): void {
  const incidents = program.command('incidents');

  incidents
    .command('list')
    .description('incidents by severity, newest first (default: every incident not closed)')
    .option('--state <state>', 'open, active, returned, unacknowledged, acknowledged, shelved, closed or all', 'open')
    .option('--severity <list>', 'watch, caution, alarm (comma-separated)')
    .option('--unit <unit>', 'one unit only')
    .option('--group <group>', 'one group only')
    .option('--limit <n>', `at most this many (up to ${MAX_LIST_LIMIT}); a list cut here says "showing N of M" and how to ask for the next page`, '100')
    .option('--cursor <next>', 'the next page of a list cut before: the cursor its "next page" line gave, with the same --state, --severity, --unit and --group')
    .option('--config <file>', 'configuration file (default: WEARSHIFT_CONFIG)')
    .option('--json', 'one JSON line per incident; "showing N of M" and the next page\'s cursor of a cut list go to stderr')
    .action(async (opts: CommonOptions & { state: string; severity?: string; unit?: string; group?: string; limit: string; cursor?: string }) => {
      const parsed = IncidentListQuerySchema.safeParse({
        state: opts.state,
        limit: opts.limit,
        ...(opts.severity !== undefined && { severity: opts.severity }),
        ...(opts.unit !== undefined && { unit: opts.unit }),
        ...(opts.group !== undefined && { group: opts.group }),
        ...(opts.cursor !== undefined && { cursor: opts.cursor }),
      });
      if (!parsed.success) throw new InputError(parsed.error.issues.map((i) => `--${String(i.path[0])}: ${i.message}`).join('; '));
      const { cursor, ...filter } = parsed.data;
      const after = cursor === undefined ? undefined : decodeCursor(filter, cursor);
      if (after !== undefined && !after.ok) throw new InputError(`--cursor: ${after.reason}`);
      const { page, total, zone } = await withStore(opts, async (store, config) => {
        const page = await store.page(filter, after?.position);
        // Counted only when it may be more than the page shows and the page did not say.
        const total = page.total ?? (page.next === null && after === undefined ? page.incidents.length : await store.count(filter));
        return { page, total, zone: config.display.timeZone };
      });
      printList(page.incidents, opts.json === true, zone, total, page.next === null ? null : encodeCursor(filter, page.next), after !== undefined);
    });

  incidents
    .command('show <id>')
    .description('one incident with its evidence and timeline')
    .option('--config <file>', 'configuration file (default: WEARSHIFT_CONFIG)')
    .option('--json', 'the incident as one JSON line')
    .action(async (id: string, opts: CommonOptions) => {
      const { incident, zone } = await withStore(opts, async (store, config) => ({ incident: await store.get(id), zone: config.display.timeZone }));
      if (incident === undefined) throw new InputError(`no incident "${id}"`);
      printIncident(incident, opts.json === true, zone);
    });

  actionCommand(
    incidents,
    'ack',
    'acknowledge: you own it; escalation stops',
    (c) => c.option('--note <text>', 'a note for the timeline'),
    (incidentId, o, now) => ({ kind: 'acknowledge', incidentId, by: String(o.by), now, ...(typeof o.note === 'string' && { note: o.note }) }),
  );
  actionCommand(
    incidents,
    'shelve',
    'suppress messages until a time (the incident is still recorded)',
    (c) => c.requiredOption('--until <iso>', 'when shelving ends, e.g. 2026-03-01T18:00:00Z', instant('until')).requiredOption('--reason <text>', 'why'),
    (incidentId, o, now) => ({ kind: 'shelve', incidentId, by: String(o.by), now, until: o.until as Date, reason: String(o.reason) }),
  );
  actionCommand(incidents, 'unshelve', 'end shelving now', (c) => c, (incidentId, o, now) => ({ kind: 'unshelve', incidentId, by: String(o.by), now }));
  actionCommand(
    incidents,
    'resolve',
    'close by hand, with a note saying why',
    (c) => c.requiredOption('--note <text>', 'why it is resolved'),
    (incidentId, o, now) => ({ kind: 'resolve', incidentId, by: String(o.by), now, note: String(o.note) }),
  );
  actionCommand(
    incidents,
    'note',
    'add a note to the timeline',
    (c) => c.requiredOption('--note <text>', 'the note'),
    (incidentId, o, now) => ({ kind: 'note', incidentId, by: String(o.by), now, note: String(o.note) }),
  );
}
