/**
 * `wearshift incidents list|show|ack|shelve|unshelve|resolve|note`: the on-call engineer's commands, straight
 * against the Redis incident store. Messages that an action causes go to the outbox, which the worker sends.
 */
import type { Command } from 'commander';
import type { Config } from '../../domain/config.ts';
import { loadConfig } from '../../domain/configFile.ts';
import { InputError } from '../../domain/errors.ts';
import type { IncidentAction } from '../../incidents/applyAction.ts';
import { IncidentFilterSchema } from '../../incidents/listFilter.ts';
import { describeState, mergedTimeline, type Incident, type IncidentSummary, type NotifiedEntry, type TimelineEntry } from '../../incidents/model.ts';
import { incidentRules } from '../../incidents/policy.ts';
import { closeQuietly, connectForCommand, redisTarget } from '../../redis/connection.ts';
import { RedisIncidents } from '../../redis/redisIncidents.ts';
import { formatTable, writeJsonLine } from '../output.ts';
import { terminalText } from '../terminalText.ts';

interface CommonOptions {
  config?: string;
  json?: boolean;
}

async function withStore<T>(opts: CommonOptions, work: (store: RedisIncidents) => Promise<T>): Promise<T> {
  const config: Config = loadConfig(opts.config ?? process.env.WEARSHIFT_CONFIG);
  const redis = await connectForCommand(redisTarget(config));
  try {
    return await work(new RedisIncidents(redis, { rules: incidentRules(config), prefix: config.redis.prefix, partitions: config.redis.partitions }));
  } finally {
    await closeQuietly(redis);
  }
}

function instant(name: string) {
  return (raw: string): Date => {
    const t = Date.parse(raw);
    if (!/(Z|[+-]\d\d:?\d\d)$/i.test(raw.trim()) || Number.isNaN(t)) throw new InputError(`--${name}: expected an ISO 8601 date-time with a time zone, such as 2026-03-01T18:00:00Z; got "${raw}"`);
    return new Date(t);
  };
}

function measurands(i: IncidentSummary): string {
  return [...new Set(i.evidence.map((f) => f.measurand))].join(',');
}

function printList(list: IncidentSummary[], json: boolean): void {
  if (json) return list.forEach((i) => writeJsonLine(i));
  if (list.length === 0) return void process.stdout.write('no incidents match\n');
  const rows = list.map((i) => [i.id, i.severity, describeState(i), measurands(i), i.openedAt.slice(0, 16).replace('T', ' '), i.lastSampleId]);
  process.stdout.write(terminalText(formatTable(['incident', 'severity', 'state', 'measurands', 'opened (sample)', 'last sample'], rows)));
}

function entryText(e: TimelineEntry | NotifiedEntry): string {
  switch (e.kind) {
    case 'opened':
      return `opened at sample ${e.sampleId}, ${e.severity}`;
    case 'finding':
      return `${e.measurand} ${e.rule}${e.direction ? ` ${e.direction}` : ''}: ${e.change === 'cleared' ? 'cleared' : e.change === 'raised' ? `raised, ${e.severity}` : `${e.previousSeverity} → ${e.severity}`} (sample ${e.sampleId})${e.explanation ? ` — ${e.explanation}` : ''}`;
    case 'returned':
      return `returned to normal (sample ${e.sampleId})`;
    case 'active-again':
      return `${e.reopened ? 'reopened' : 'active again'} (sample ${e.sampleId})`;
    case 'acknowledged':
      return `acknowledged by ${e.by}${e.credential ? ` (${e.credential})` : e.recipient ? ` (link sent to ${e.recipient})` : ''}${e.note ? `: ${e.note}` : ''}`;
    case 'unacknowledged':
      return `acknowledgement withdrawn: ${e.reason}`;
    case 'shelved':
      return `shelved by ${e.by} until ${e.until}: ${e.reason}`;
    case 'unshelved':
      return e.by ? `unshelved by ${e.by}` : 'shelving ended';
    case 'closed':
      return `closed (${e.how})${e.by ? ` by ${e.by}` : ''}${e.note ? `: ${e.note}` : ''}`;
    case 'note':
      return `note by ${e.by}: ${e.note}`;
    case 'notified':
      return `${e.type.replace('wearshift.incident.', '')} → ${e.targets.length > 0 ? e.targets.join(', ') : 'nobody'} (${e.reason})`;
  }
}

function printIncident(i: Incident, json: boolean): void {
  if (json) return writeJsonLine(i);
  const lines = [
    `${i.id}`,
    `  ${i.unit} / ${i.component}${i.measurand ? ` / ${i.measurand}` : ''} · group ${i.group}`,
    `  ${i.severity} (peak ${i.peakSeverity}) · ${describeState(i)}`,
    `  opened ${i.openedAt} at sample ${i.openedBySampleId}; last sample ${i.lastSampleId} (${i.lastSampledAt})`,
    ...(i.escalation.policy ? [`  escalation: policy ${i.escalation.policy}, tier ${Math.max(0, i.escalation.reachedTier)}${i.escalation.dueAt ? `, next check ${i.escalation.dueAt}` : ''}`] : []),
    '',
    'evidence',
    ...i.evidence.map((f) => `  ${f.measurand} ${f.rule} ${f.severity}: ${f.explanation}`),
    '',
    'timeline',
    ...mergedTimeline(i).map((e) => `  ${e.at}  ${entryText(e)}`),
  ];
  // Each line made safe on its own: a line break inside a note or name must not start a line of its own either.
  process.stdout.write(`${lines.map((l) => terminalText(l).replace(/\n/g, '\\n')).join('\n')}\n`);
}

type ActionBuilder = (id: string, opts: Record<string, unknown>, now: Date) => IncidentAction;

function actionCommand(parent: Command, name: string, description: string, configure: (c: Command) => Command, build: ActionBuilder): void {
  configure(parent.command(`${name} <id>`).description(description).requiredOption('--by <name>', 'who acts'))
    .option('--config <file>', 'configuration file (default: WEARSHIFT_CONFIG)')
    .option('--json', 'print the incident as one JSON line')
    .action(async (id: string, opts: CommonOptions & Record<string, unknown>) => {
      const { incident } = await withStore(opts, (store) => store.applyAction(build(id, opts, new Date())));
      if (opts.json) writeJsonLine(incident);
      else process.stdout.write(`${terminalText(incident.id)}: ${describeState(incident)}\n`);
    });
}

export function registerIncidents(program: Command): void {
  const incidents = program.command('incidents').description('list, show, acknowledge, shelve and resolve incidents');

  incidents
    .command('list')
    .description('incidents by severity, newest first (default: every incident not closed)')
    .option('--state <state>', 'open, active, returned, unacknowledged, acknowledged, shelved, closed or all', 'open')
    .option('--severity <list>', 'watch, caution, alarm (comma-separated)')
    .option('--unit <unit>', 'one unit only')
    .option('--group <group>', 'one group only')
    .option('--limit <n>', 'at most this many', '100')
    .option('--config <file>', 'configuration file (default: WEARSHIFT_CONFIG)')
    .option('--json', 'one JSON line per incident')
    .action(async (opts: CommonOptions & { state: string; severity?: string; unit?: string; group?: string; limit: string }) => {
      const parsed = IncidentFilterSchema.safeParse({
        state: opts.state,
        limit: opts.limit,
        ...(opts.severity !== undefined && { severity: opts.severity }),
        ...(opts.unit !== undefined && { unit: opts.unit }),
        ...(opts.group !== undefined && { group: opts.group }),
      });
      if (!parsed.success) throw new InputError(parsed.error.issues.map((i) => `--${String(i.path[0])}: ${i.message}`).join('; '));
      printList(await withStore(opts, (store) => store.list(parsed.data)), opts.json === true);
    });

  incidents
    .command('show <id>')
    .description('one incident with its evidence and timeline')
    .option('--config <file>', 'configuration file (default: WEARSHIFT_CONFIG)')
    .option('--json', 'the incident as one JSON line')
    .action(async (id: string, opts: CommonOptions) => {
      const incident = await withStore(opts, (store) => store.get(id));
      if (incident === undefined) throw new InputError(`no incident "${id}"`);
      printIncident(incident, opts.json === true);
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
