/** `wearshift import --map` as an integrator runs it: the dry-run preview, the per-row report and the enqueued results. */
import { mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { openQueue, QUEUE_NAMES, resolveQueueSettings } from '../../src/queue/queues.ts';
import { runCli } from '../helpers/cli.ts';
import { freePort, startRedisServer, type RedisServer } from '../helpers/redisServer.ts';

let dir: string;
let server: RedisServer;

beforeAll(async () => {
  dir = mkdtempSync(join(tmpdir(), 'wearshift-lab-import-'));
  server = await startRedisServer();
});
afterAll(async () => {
  rmSync(dir, { recursive: true, force: true });
  await server?.dispose();
});

describe('wearshift import --map', () => {
  it('--dry-run prints the first mapped events and reports bad cells by row and column, without Redis', async () => {
    const lines = readFileSync('demo/labs/engine-lab.csv', 'utf8').split('\n');
    lines[4] = lines[4]!.replace(/;\d\d\.\d\d\.2026 \d\d:\d\d;/, ';2026/13/01;');
    const file = join(dir, 'engine.csv');
    writeFileSync(file, lines.join('\n'));
    const r = await runCli(['import', '--map', 'demo/labs/engine-lab.map.yaml', '--dry-run', '--show', '2', file], { REDIS_URL: `redis://127.0.0.1:${await freePort()}` });
    expect(r.code).toBe(1);
    const shown = r.stdout.split('\n').filter((l) => l.startsWith('row '));
    expect(shown).toHaveLength(2);
    expect(JSON.parse(shown[0]!.replace(/^row 2 → /, ''))).toMatchObject({ sampleId: 'EL-4101', unit: 'GEN-1', component: 'engine', readings: { water: 300 } });
    expect(r.stderr).toBe('row 5, column "Sampled" (sampledAt): "2026/13/01" is not a date in the format "DD.MM.YYYY HH:mm" or "DD.MM.YYYY" [sampleId EL-4104]\n');
    expect(r.stdout).toContain(`${file}: 19 valid, 1 rejected of 20 samples (dry run: nothing enqueued)`);
  });

  it('enqueues every sample of the demo workbook on the results queue', async () => {
    const prefix = '{labimport}';
    const config = join(dir, 'config.yaml');
    writeFileSync(config, `redis:\n  prefix: "${prefix}"\n`);
    const r = await runCli(['import', '--map', 'demo/labs/gearbox-lab.map.yaml', '--config', config, '--json', 'demo/labs/gearbox-lab.xlsx'], { REDIS_URL: server.url });
    expect(r.stderr).toBe('');
    expect(r.code).toBe(0);
    expect(JSON.parse(r.stdout.trim().split('\n').pop()!)).toMatchObject({ type: 'summary', records: 16, accepted: 16, rejected: 0, enqueued: 16 });
    const queue = openQueue(QUEUE_NAMES.results, server.client(), resolveQueueSettings({ prefix }));
    const jobs = await queue.getWaiting(0, 100);
    expect(jobs).toHaveLength(16);
    const first = jobs.map((j) => j.data as { sampleId: string; readings: Record<string, unknown> }).find((d) => d.sampleId === 'GB-77001')!;
    expect(first.readings).toMatchObject({ Si: '<1', iso4406: '18/16/13' });
    await queue.close();
  });

  it('a mapping mistake stops with exit 2 and the path in the mapping', async () => {
    const map = join(dir, 'bad.yaml');
    writeFileSync(map, 'layout: sideways\n');
    const r = await runCli(['import', '--map', map, '--dry-run', 'demo/labs/engine-lab.csv']);
    expect(r.code).toBe(2);
    expect(r.stderr).toContain(`${map}: invalid lab mapping`);
    expect(r.stderr).toContain('layout:');
  });
});
