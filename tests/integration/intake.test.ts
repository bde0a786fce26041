/** `wearshift import` as an operator runs it: the per-line error report, the exit code, and the enqueued results. */
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { openQueue, QUEUE_NAMES, resolveQueueSettings } from '../../src/queue/queues.ts';
import { runCli } from '../helpers/cli.ts';
import { fleetCsv, inventedFleet } from '../helpers/fleetCsv.ts';
import { freePort, startRedisServer, type RedisServer } from '../helpers/redisServer.ts';

let dir: string;
let server: RedisServer;

beforeAll(async () => {
  dir = mkdtempSync(join(tmpdir(), 'wearshift-import-'));
  server = await startRedisServer();
});
afterAll(async () => {
  rmSync(dir, { recursive: true, force: true });
  await server?.dispose();
});

const fleet = inventedFleet({ units: 2, samplesPerUnit: 6 });

function withErrors(): string {
  const lines = fleetCsv(fleet).trimEnd().split('\n');
  const header = lines[0]!.split(',');
  const fe = header.indexOf('Fe');
  const when = header.indexOf('sampledAt');
  const bad = (n: number, col: number, value: string) => {
    const cells = lines[n]!.split(',');
    cells[col] = value;
    lines[n] = cells.join(',');
  };
  bad(3, fe, '-1');
  bad(7, when, '2026-13-40T00:00:00Z');
  return `${lines.join('\n')}\n`;
}

// Each case starts the real command line (a Node process through tsx): on a busy shared machine that alone can take
// a minute, so the bound is generous; nothing here measures speed.
describe('wearshift import', { timeout: 600_000 }, () => {
  it('--dry-run validates without Redis, reports each bad line with sampleId, field and reason, and exits 1', async () => {
    const file = join(dir, 'bad.csv');
    writeFileSync(file, withErrors());
    // Nothing listens on this port: a dry run must not need Redis.
    const r = await runCli(['import', file, '--dry-run'], { REDIS_URL: `redis://127.0.0.1:${await freePort()}` });
    expect(r.code).toBe(1);
    const lines = r.stderr.trim().split('\n');
    expect(lines).toEqual([
      `line 4 (sampleId ${fleet[2]!.sampleId}): readings.Fe: must not be negative (got -1)`,
      `line 8 (sampleId ${fleet[6]!.sampleId}): sampledAt: sampledAt must be an ISO 8601 date-time with a time zone, such as 2026-03-01T08:00:00Z`,
    ]);
    expect(r.stdout).toBe(`${file}: 10 valid, 2 rejected of 12 records (dry run: nothing enqueued)\n`);
  });

  it('exits 0 on a clean file, and --json gives one line per rejected record and a summary', async () => {
    const clean = join(dir, 'clean.jsonl');
    writeFileSync(clean, fleet.map((e) => JSON.stringify(e)).join('\n'));
    const ok = await runCli(['import', clean, '--dry-run', '--json']);
    expect(ok.code).toBe(0);
    expect(JSON.parse(ok.stdout)).toEqual({ type: 'summary', file: clean, records: 12, accepted: 12, rejected: 0, enqueued: 0, duplicates: 0, withoutOilChanged: fleet.filter((e) => !('oilChanged' in e)).length, dryRun: true });

    const bad = join(dir, 'bad-json.csv');
    writeFileSync(bad, withErrors());
    const r = await runCli(['import', bad, '--dry-run', '--json']);
    const out = r.stdout.trim().split('\n').map((l) => JSON.parse(l) as Record<string, unknown>);
    expect(out.map((o) => o.type)).toEqual(['rejected', 'rejected', 'summary']);
    expect(out[0]).toEqual({ type: 'rejected', line: 4, sampleId: fleet[2]!.sampleId, errors: [{ path: 'readings.Fe', reason: 'must not be negative (got -1)' }] });
  });

  it('enqueues the valid lines on the results queue and still reports the bad ones', async () => {
    const file = join(dir, 'to-queue.csv');
    writeFileSync(file, withErrors());
    const prefix = '{import}';
    const config = join(dir, 'config.yaml');
    writeFileSync(config, `redis:\n  prefix: "${prefix}"\n`);
    const r = await runCli(['import', file, '--config', config], { REDIS_URL: server.url });
    expect(r.code).toBe(1);
    expect(r.stdout).toBe(`${file}: 10 enqueued, 2 rejected of 12 records\n`);
    // Which Redis and prefix, said before anything is written.
    expect(r.stderr.split('\n')[0]).toBe(`wearshift: Redis ${server.url} (REDIS_URL), key prefix ${prefix}`);
    const queue = openQueue(QUEUE_NAMES.results, server.client(), resolveQueueSettings({ prefix }));
    const jobs = await queue.getWaiting(0, 100);
    expect(jobs.map((j) => (j.data as { sampleId: string }).sampleId).sort()).toEqual(fleet.filter((_, i) => i !== 2 && i !== 6).map((e) => e.sampleId).sort());
    await queue.close();
  });

  it('with --history enqueues the valid lines as history jobs of --batch-size results and still reports the bad ones', async () => {
    const file = join(dir, 'history.csv');
    writeFileSync(file, withErrors());
    const prefix = '{import-history}';
    const config = join(dir, 'history.yaml');
    writeFileSync(config, `redis:\n  prefix: "${prefix}"\n`);
    const r = await runCli(['import', file, '--config', config, '--history', '--batch-size', '4'], { REDIS_URL: server.url });
    expect(r.code).toBe(1);
    expect(r.stdout).toBe(`${file}: 10 enqueued, 2 rejected of 12 records\n`);
    const settings = resolveQueueSettings({ prefix });
    const history = openQueue(QUEUE_NAMES.history, server.client(), settings);
    const results = openQueue(QUEUE_NAMES.results, server.client(), settings);
    const jobs = await history.getWaiting(0, 100);
    // 10 valid lines in jobs of at most 4, nothing on the results queue.
    expect(jobs.map((j) => (j.data as { records: unknown[] }).records.length).sort()).toEqual([2, 4, 4]);
    const sent = jobs.flatMap((j) => (j.data as { records: Array<{ sampleId: string }> }).records.map((e) => e.sampleId));
    expect(sent.sort()).toEqual(fleet.filter((_, i) => i !== 2 && i !== 6).map((e) => e.sampleId).sort());
    expect(await results.getWaitingCount()).toBe(0);
    await history.close();
    await results.close();
  });

  it('validates each line once and reports a revision conflict the producer refused by its line, not as enqueued', async () => {
    const lines = fleetCsv(fleet.slice(0, 3)).trimEnd().split('\n');
    const header = lines[0]!.split(',');
    const fe = header.indexOf('Fe');
    // Line 4 repeats line 3's sampleId and revision with another Fe reading: a correction without a higher revision.
    const repeat = lines[3]!.split(',');
    repeat[fe] = String(Number(repeat[fe]) + 50);
    const file = join(dir, 'conflict.csv');
    writeFileSync(file, `${[...lines, repeat.join(',')].join('\n')}\n`);
    const config = join(dir, 'conflict.yaml');
    writeFileSync(config, 'redis:\n  prefix: "{import-conflict}"\n');
    const r = await runCli(['import', file, '--config', config, '--json'], { REDIS_URL: server.url });
    expect(r.code).toBe(1);
    const out = r.stdout.trim().split('\n').map((l) => JSON.parse(l) as Record<string, unknown>);
    expect(out.filter((o) => o.type === 'rejected')).toEqual([{ type: 'rejected', line: 5, sampleId: fleet[2]!.sampleId, errors: [expect.objectContaining({ path: 'revision' })] }]);
    expect(out.at(-1)).toMatchObject({ type: 'summary', records: 4, accepted: 3, rejected: 1, enqueued: 3 });
  });

  /** Lines 2–3: two results; line 4: line 2's sampleId and revision with another Fe; line 5: line 3 again as it was. */
  function reissued(): string {
    const lines = fleetCsv(fleet.slice(0, 2)).trimEnd().split('\n');
    const fe = lines[0]!.split(',').indexOf('Fe');
    const changed = lines[1]!.split(',');
    changed[fe] = String(Number(changed[fe]) + 50);
    return `${[...lines, changed.join(','), lines[2]!].join('\n')}\n`;
  }

  it('--dry-run: a later line with an earlier line\'s sampleId and revision is rejected naming both lines when its content differs, and taken once when it is the same', async () => {
    const file = join(dir, 'reissued.csv');
    writeFileSync(file, reissued());
    const r = await runCli(['import', file, '--dry-run']);
    expect(r.code).toBe(1);
    expect(r.stderr.trim().split('\n')).toEqual([
      `line 4 (sampleId ${fleet[0]!.sampleId}): revision: sample ${fleet[0]!.sampleId} revision 0 is already on line 2 with different content; a correction needs a higher revision (e.g. 1)`,
      `line 5 (sampleId ${fleet[1]!.sampleId}): repeats line 3 (same sampleId, revision and content): taken once`,
    ]);
    expect(r.stdout.split('\n')[0]).toBe(`${file}: 3 valid, 1 rejected of 4 records; 1 repeats an earlier line, taken once (dry run: nothing enqueued)`);
  });

  it('finds the conflict across batches (--batch-size 1): the first line is enqueued, the conflicting one refused, the repeat enqueued once', async () => {
    const file = join(dir, 'reissued-batches.csv');
    writeFileSync(file, reissued());
    const prefix = '{import-reissued}';
    const config = join(dir, 'reissued.yaml');
    writeFileSync(config, `redis:\n  prefix: "${prefix}"\n`);
    const r = await runCli(['import', file, '--config', config, '--batch-size', '1', '--json'], { REDIS_URL: server.url });
    expect(r.code).toBe(1);
    const out = r.stdout.trim().split('\n').map((l) => JSON.parse(l) as Record<string, unknown>);
    expect(out.filter((o) => o.type !== 'summary')).toEqual([
      { type: 'rejected', line: 4, sampleId: fleet[0]!.sampleId, errors: [{ path: 'revision', reason: expect.stringContaining('is already on line 2 with different content') }] },
      { type: 'duplicate', line: 5, sampleId: fleet[1]!.sampleId, of: 3 },
    ]);
    expect(out.at(-1)).toMatchObject({ type: 'summary', records: 4, accepted: 3, rejected: 1, enqueued: 2, duplicates: 1 });
    const queue = openQueue(QUEUE_NAMES.results, server.client(), resolveQueueSettings({ prefix }));
    const jobs = (await queue.getWaiting(0, 100)).map((j) => j.data as { sampleId: string; readings: Record<string, unknown> });
    await queue.close();
    expect(jobs.map((j) => j.sampleId).sort()).toEqual([fleet[0]!.sampleId, fleet[1]!.sampleId].sort());
    // The first line's reading is what went, not the conflicting one's.
    expect(jobs.find((j) => j.sampleId === fleet[0]!.sampleId)!.readings.Fe).toBe(fleet[0]!.readings.Fe);
  });

  it('says clearly when Redis cannot be reached', async () => {
    const file = join(dir, 'clean2.jsonl');
    writeFileSync(file, JSON.stringify(fleet[0]));
    const r = await runCli(['import', file], { REDIS_URL: `redis://127.0.0.1:${await freePort()}` });
    expect(r.code).toBe(2);
    expect(r.stderr).toMatch(/cannot reach Redis at redis:\/\/127\.0\.0\.1:\d+.*use --dry-run to validate without Redis/);
  });
});
