/** `wearshift incidents …` against a private redis-server, run in-process through the real command parser. */
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it, vi } from 'vitest';
import type { Step } from '../../src/analysis/model.ts';
import { main } from '../../src/cli/main.ts';
import { ADVISORY_CAUTION } from '../../src/domain/caution.ts';
import { ConfigSchema } from '../../src/domain/config.ts';
import type { Severity } from '../../src/domain/finding.ts';
import { incidentRules } from '../../src/incidents/policy.ts';
import { formatTime } from '../../src/notify/format.ts';
import { RedisIncidents as RedisIncidentStore } from '../../src/redis/redisIncidents.ts';
import { createEventHub, type LiveEvent } from '../../src/http/eventHub.ts';
import { bridgeLiveEvents } from '../../src/runtime/liveBridge.ts';
import { silentLogger } from '../../src/telemetry/logger.ts';
import { runCli } from '../helpers/cli.ts';
import { startRedisServer, type RedisServer } from '../helpers/redisServer.ts';

let server: RedisServer;
let dir: string;
let configFile: string;
const savedUrl = process.env.REDIS_URL;

function step(unit: string, n: number, severity: Severity): Step {
  const sampleId = `${unit}-${n}`;
  const sampledAt = new Date(Date.parse('2026-02-01T00:00:00Z') + n * 86_400_000).toISOString();
  return {
    sampleId,
    sampledAt,
    findings: [{ unit, component: 'engine', group: 'engines', measurand: 'Fe', rule: 'limit', disposition: 'incident', severity, value: 120, threshold: 100, basis: 'reading', sampleId, sampledAt, explanation: 'Fe above its caution limit' }],
  };
}

async function run(...argv: string[]): Promise<{ code: number; out: string; err: string }> {
  let out = '';
  let err = '';
  const o = vi.spyOn(process.stdout, 'write').mockImplementation((s) => ((out += String(s)), true));
  const e = vi.spyOn(process.stderr, 'write').mockImplementation((s) => ((err += String(s)), true));
  try {
    const code = await main(argv);
    return { code, out, err };
  } finally {
    o.mockRestore();
    e.mockRestore();
    process.exitCode = undefined;
  }
}

beforeAll(async () => {
  server = await startRedisServer();
  dir = mkdtempSync(join(tmpdir(), 'wearshift-cli-'));
  configFile = join(dir, 'site.yaml');
  writeFileSync(configFile, "redis:\n  prefix: '{cli}'\n");
  process.env.REDIS_URL = server.url;
  const store = new RedisIncidentStore(server.client(), { rules: incidentRules(ConfigSchema.parse({})), prefix: '{cli}' });
  for (const [unit, severity] of [['GEN-1', 'caution'], ['GEN-2', 'alarm']] as const) {
    const s = step(unit, 1, severity);
    await store.applySteps({ unit, component: 'engine' }, [s], { group: 'engines', now: new Date('2026-02-03T00:00:00Z'), quietBefore: new Date(0) });
  }
});

afterAll(async () => {
  if (savedUrl === undefined) delete process.env.REDIS_URL;
  else process.env.REDIS_URL = savedUrl;
  rmSync(dir, { recursive: true, force: true });
  await server.dispose();
});

// Each case starts the real command line (a Node process through tsx): on a busy shared machine that alone can take
// a minute, so the bound is generous; nothing here measures speed.
describe('wearshift incidents', { timeout: 600_000 }, () => {
  it('lists as a table and as JSON lines', async () => {
    const table = await run('incidents', 'list', '--config', configFile);
    expect(table.code).toBe(0);
    // Which Redis and key prefix the list comes from, said before the table (on stderr, so that the table pipes).
    expect(table.err).toMatch(/^wearshift: Redis redis:\/\/127\.0\.0\.1:\d+ \(REDIS_URL\), key prefix \{cli\}\n/);
    const lines = table.out.trim().split('\n');
    expect(lines[0]).toMatch(/^incident\s+severity\s+state/);
    expect(lines[2]).toContain('GEN-2/engine@GEN-2-1');
    expect(lines[3]).toContain('GEN-1/engine@GEN-1-1');
    // Opened at the sample's time, in the one time format; then the zone stated and the caution.
    expect(lines[2]).toMatch(/ \d{4}-\d\d-\d\dT\d\d:\d\dZ /);
    expect(lines.slice(-2)).toEqual(['Times are ISO 8601 in UTC (Z).', ADVISORY_CAUTION]);

    const json = await run('incidents', 'list', '--severity', 'caution', '--json', '--config', configFile);
    const parsed = json.out.trim().split('\n').map((l) => JSON.parse(l) as { id: string; severity: string });
    expect(parsed.map((p) => [p.id, p.severity])).toEqual([['GEN-1/engine@GEN-1-1', 'caution']]);
    expect(json.out.trim().split('\n').map((l) => (JSON.parse(l) as { advisory?: string }).advisory)).toEqual([ADVISORY_CAUTION]);
  });

  it('acknowledges, shelves and resolves, and shows the timeline', async () => {
    const id = 'GEN-2/engine@GEN-2-1';
    const ack = await run('incidents', 'ack', id, '--by', 'R. Tanaka', '--note', 'on site at 14:00', '--config', configFile);
    // The state, then the caution: the tool advises, people decide.
    expect(ack).toMatchObject({ code: 0, out: `${id}: active, acknowledged\n${ADVISORY_CAUTION}\n` });
    const until = new Date(Date.now() + 3_600_000).toISOString();
    const shelve = await run('incidents', 'shelve', id, '--until', until, '--reason', 'crane lift today', '--by', 'R. Tanaka', '--json', '--config', configFile);
    expect(JSON.parse(shelve.out).shelved).toMatchObject({ until, reason: 'crane lift today' });
    expect(JSON.parse(shelve.out).advisory).toBe(ADVISORY_CAUTION);
    const resolve = await run('incidents', 'resolve', id, '--note', 'filter element replaced', '--by', 'R. Tanaka', '--config', configFile);
    expect(resolve.out).toBe(`${id}: closed\n${ADVISORY_CAUTION}\n`);

    const show = await run('incidents', 'show', id, '--config', configFile);
    expect(show.code).toBe(0);
    expect(show.out).toContain('acknowledged by R. Tanaka: on site at 14:00');
    expect(show.out).toContain('shelved by R. Tanaka until');
    expect(show.out).toContain('closed (resolved) by R. Tanaka: filter element replaced');
    // Times to the minute with their zone, never raw ISO with seconds and milliseconds; the caution closes it.
    expect(show.out).toMatch(/opened \d{4}-\d\d-\d\dT\d\d:\d\dZ at sample/);
    expect(show.out).not.toMatch(/T\d\d:\d\d:\d\d/);
    expect(show.out.trimEnd().split('\n').at(-1)).toBe(ADVISORY_CAUTION);

    const closed = await run('incidents', 'list', '--state', 'closed', '--json', '--config', configFile);
    expect(closed.out.trim().split('\n').map((l) => (JSON.parse(l) as { id: string }).id)).toEqual([id]);
  });

  it('fails with a clear message and exit code 2 on bad input', async () => {
    const unknown = await run('incidents', 'show', 'GEN-9/engine@X', '--config', configFile);
    expect(unknown.code).toBe(2);
    // First which Redis and key prefix the command uses, then the problem.
    expect(unknown.err).toMatch(/^wearshift: Redis redis:\/\/127\.0\.0\.1:\d+ \(REDIS_URL\), key prefix \S+\nwearshift: no incident "GEN-9\/engine@X"\n$/);
    const noNote = await run('incidents', 'resolve', 'GEN-1/engine@GEN-1-1', '--note', ' ', '--by', 'x', '--config', configFile);
    expect(noNote.code).toBe(2);
    expect(noNote.err.endsWith('\nwearshift: note: required\n')).toBe(true);
    const badUntil = await run('incidents', 'shelve', 'GEN-1/engine@GEN-1-1', '--until', 'tomorrow', '--reason', 'x', '--by', 'x', '--config', configFile);
    expect(badUntil.code).toBe(2);
    expect(badUntil.err).toContain('--until: expected an ISO 8601 date-time');
    const badState = await run('incidents', 'list', '--state', 'gone', '--config', configFile);
    expect(badState.err).toContain('--state: unknown state "gone"');
    const missingBy = await run('incidents', 'ack', 'GEN-1/engine@GEN-1-1', '--config', configFile);
    expect(missingBy.code).toBe(2);
    expect(missingBy.err).toContain("required option '--by <name>'");
  });

  it('writes the end of a shelving in the site zone with its offset, in shelve, list and show alike', async () => {
    const berlin = join(dir, 'berlin.yaml');
    writeFileSync(berlin, "redis:\n  prefix: '{cli}'\ndisplay:\n  timeZone: Europe/Berlin\n");
    const id = 'GEN-1/engine@GEN-1-1';
    const until = new Date(Math.ceil((Date.now() + 2 * 3_600_000) / 60_000) * 60_000).toISOString();
    const local = formatTime(until, 'Europe/Berlin');
    expect(local).toMatch(/T\d\d:\d\d\+0[12]:00$/);
    const shelve = await run('incidents', 'shelve', id, '--until', until, '--reason', 'crane lift', '--by', 'R. Tanaka', '--config', berlin);
    expect(shelve).toMatchObject({ code: 0, out: `${id}: active, unacknowledged, shelved until ${local}\n${ADVISORY_CAUTION}\n` });
    const list = await run('incidents', 'list', '--config', berlin);
    expect(list.out).toContain(`shelved until ${local}`);
    expect(list.out).toContain('Times are ISO 8601 in the site zone Europe/Berlin');
    const show = await run('incidents', 'show', id, '--config', berlin);
    expect(show.out).toContain(`· active, unacknowledged, shelved until ${local}\n`);
    expect(show.out).toContain(`shelved by R. Tanaka until ${local}: crane lift`);
    for (const out of [shelve.out, list.out, show.out]) expect(out).not.toContain(until.slice(0, 16));
    // JSON keeps the stored instant as it is.
    const json = await run('incidents', 'show', id, '--json', '--config', berlin);
    expect((JSON.parse(json.out) as { shelved: { until: string } }).shelved.until).toBe(until);
    await run('incidents', 'unshelve', id, '--by', 'R. Tanaka', '--config', berlin);
  });

  it('says when a list is cut at --limit, with how many match in all (on stderr with --json)', async () => {
    const store = new RedisIncidentStore(server.client(), { rules: incidentRules(ConfigSchema.parse({})), prefix: '{cli}' });
    for (const [n, severity] of (['alarm', 'alarm', 'caution', 'watch'] as const).entries()) {
      const unit = `LIM-${n + 1}`;
      await store.applySteps({ unit, component: 'engine' }, [step(unit, 1, severity)], { group: 'engines', now: new Date('2026-02-03T00:00:00Z'), quietBefore: new Date(0) });
    }
    const all = async (...filter: string[]) => (await run('incidents', 'list', ...filter, '--limit', '1000', '--json', '--config', configFile)).out.trim().split('\n').length;
    const open = await all();
    expect(open).toBeGreaterThanOrEqual(5);
    const cut = await run('incidents', 'list', '--limit', '2', '--config', configFile);
    expect(cut.code).toBe(0);
    expect(cut.out.split('\n').filter((l) => /^(LIM|GEN)-\d\/engine@/.test(l))).toHaveLength(2);
    expect(cut.out).toMatch(new RegExp(`showing 2 of ${open} incidents; the next page: --cursor (\\S+) \\(with the same --state, --severity, --unit and --group\\), or narrow the list with --state, --severity, --unit or --group; --limit up to 1000\n`));
    // Following the cursors page by page gives every incident of the whole list once, in its order, and the last page says so.
    const whole = (await run('incidents', 'list', '--limit', '1000', '--json', '--config', configFile)).out.trim().split('\n').map((l) => (JSON.parse(l) as { id: string }).id);
    const paged: string[] = [];
    let cursor: string | undefined;
    for (let pages = 0; pages < 10; pages++) {
      const page = await run('incidents', 'list', '--limit', '2', '--json', ...(cursor === undefined ? [] : ['--cursor', cursor]), '--config', configFile);
      expect(page.code).toBe(0);
      paged.push(...page.out.trim().split('\n').map((l) => (JSON.parse(l) as { id: string }).id));
      cursor = /--cursor (\S+) /.exec(page.err)?.[1];
      if (cursor === undefined) {
        expect(page.err).toContain('(the last page)');
        break;
      }
    }
    expect(paged).toEqual(whole);
    // A cursor of another list is refused, saying why.
    const first = /--cursor (\S+) /.exec((await run('incidents', 'list', '--limit', '1', '--json', '--config', configFile)).err)![1]!;
    const other = await run('incidents', 'list', '--severity', 'alarm', '--cursor', first, '--config', configFile);
    expect(other.code).not.toBe(0);
    expect(other.err).toMatch(/--cursor: /);
    // Narrowed by severity: the total is of the matching ones, not of the index.
    const alarms = await all('--severity', 'alarm');
    const cutAlarms = await run('incidents', 'list', '--severity', 'alarm', '--limit', '1', '--json', '--config', configFile);
    expect(cutAlarms.out.trim().split('\n')).toHaveLength(1);
    expect(cutAlarms.err).toContain(`wearshift: showing 1 of ${alarms} incidents;`);
    // Whole lists say nothing of the kind.
    const complete = await run('incidents', 'list', '--limit', String(open), '--config', configFile);
    expect(complete.out).not.toContain('showing');
  });

  it('says where it tried when Redis cannot be reached', async () => {
    const saved = process.env.REDIS_URL;
    process.env.REDIS_URL = 'redis://127.0.0.1:1';
    try {
      const r = await run('incidents', 'list', '--config', configFile);
      expect(r.code).toBe(2);
      expect(r.err).toContain('cannot reach Redis at redis://127.0.0.1:1');
    } finally {
      process.env.REDIS_URL = saved;
    }
  });
});

// The real command line as its own process: the announcement must be out before the process ends, not only before
// `main` returns. Bounded by the test's timeout; the subscriber waits for the event, never for a guessed time.
describe('wearshift incidents actions and open boards', { timeout: 600_000 }, () => {
  it('announces ack and resolve on the live channel, as the API does, so that an open board updates', async () => {
    const unit = 'LIVE-1';
    const store = new RedisIncidentStore(server.client(), { rules: incidentRules(ConfigSchema.parse({})), prefix: '{cli}' });
    await store.applySteps({ unit, component: 'engine' }, [step(unit, 1, 'alarm')], { group: 'engines', now: new Date('2026-02-03T00:00:00Z'), quietBefore: new Date(0) });
    const id = `${unit}/engine@${unit}-1`;
    // What a board's API process receives: the channel bridged into its hub.
    const hub = createEventHub();
    const received: LiveEvent[] = [];
    let arrived: (() => void) | undefined;
    hub.subscribe((e) => {
      received.push(e);
      arrived?.();
    });
    await bridgeLiveEvents(server.client(), '{cli}', hub, silentLogger());
    const next = (count: number) =>
      new Promise<void>((resolve) => {
        arrived = () => received.length >= count && resolve();
        arrived();
      });

    const ack = await runCli(['incidents', 'ack', id, '--by', 'R. Tanaka', '--config', configFile], { REDIS_URL: server.url });
    expect(ack.code).toBe(0);
    await next(1);
    expect(received[0]).toMatchObject({ type: 'incident', incidentId: id, unit, component: 'engine', severity: 'alarm', change: 'acknowledged', state: 'active, acknowledged' });

    const resolved = await runCli(['incidents', 'resolve', id, '--note', 'bearing replaced', '--by', 'R. Tanaka', '--json', '--config', configFile], { REDIS_URL: server.url });
    expect(resolved.code).toBe(0);
    expect(JSON.parse(resolved.stdout)).toMatchObject({ id, advisory: ADVISORY_CAUTION });
    await next(2);
    expect(received[1]).toMatchObject({ type: 'incident', incidentId: id, change: 'closed', state: 'closed' });
  });
});
