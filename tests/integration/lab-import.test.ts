/** `wearshift import --map` as an integrator runs it: the dry-run preview, the per-row report and the enqueued results. */
import { spawn, spawnSync } from 'node:child_process';
import { mkdtempSync, readFileSync, rmSync, statSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { openQueue, QUEUE_NAMES, resolveQueueSettings } from '../../src/queue/queues.ts';
import { BIN, runCli } from '../helpers/cli.ts';
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

/** util-linux `script` gives the command a pseudo-terminal, so that it draws its progress bar as for a person. */
const hasScript = spawnSync('script', ['--version']).status === 0;

/** Runs the command line on a pseudo-terminal 200 columns wide; everything it drew (stdout and stderr). */
function onTerminal(args: readonly string[]): Promise<string> {
  const quote = (a: string) => `'${a.replace(/'/g, `'\\''`)}'`;
  const command = `stty cols 200 rows 40; exec ${[process.execPath, BIN, ...args].map(quote).join(' ')}`;
  return new Promise((resolve, reject) => {
    const child = spawn('script', ['-qec', command, '/dev/null'], { stdio: ['ignore', 'pipe', 'pipe'] });
    let out = '';
    child.stdout.on('data', (d: Buffer) => (out += d.toString()));
    child.stderr.on('data', (d: Buffer) => (out += d.toString()));
    child.on('error', reject);
    child.on('close', () => resolve(out));
  });
}

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

  it('rejects a row with an earlier row\'s sampleId and revision but other readings, naming both rows, whatever the batches', async () => {
    const lines = readFileSync('demo/labs/engine-lab.csv', 'utf8').trimEnd().split('\n');
    // The last row again (same charge) with another iron reading: a correction without a higher revision.
    const last = lines.at(-1)!;
    const again = last.replace(/;18,0;/, ';98,0;');
    expect(again).not.toBe(last);
    const file = join(dir, 'engine-reissued.csv');
    writeFileSync(file, `${[...lines, again].join('\n')}\n`);
    const r = await runCli(['import', '--map', 'demo/labs/engine-lab.map.yaml', '--dry-run', '--show', '0', '--batch-size', '1', file]);
    expect(r.code).toBe(1);
    expect(r.stderr).toBe(`row ${lines.length + 1} (revision): sample EL-4120 revision 0 is already on row ${lines.length} with different content; a correction needs a higher revision (e.g. 1) [sampleId EL-4120]\n`);
    expect(r.stdout).toContain(`${file}: 20 valid, 1 rejected of 21 samples (dry run: nothing enqueued)`);
  });

  it.skipIf(!hasScript)('on a terminal it draws the same progress bar as a plain import, to the end of the file, and every rejected record is written above it', async () => {
    const lines = readFileSync('demo/labs/engine-lab.csv', 'utf8').split('\n');
    lines[4] = lines[4]!.replace(/;\d\d\.\d\d\.2026 \d\d:\d\d;/, ';2026/13/01;');
    const file = join(dir, 'engine-bar.csv');
    writeFileSync(file, lines.join('\n'));
    const size = statSync(file).size;
    const mapped = await onTerminal(['import', '--map', 'demo/labs/engine-lab.map.yaml', '--dry-run', '--show', '0', file]);
    expect(mapped).toContain(`100% | ${size}/${size} bytes | 19 accepted, 1 rejected`);
    expect(mapped).toContain('row 5, column "Sampled" (sampledAt): "2026/13/01" is not a date');
    // A plain import of the same samples, written as the result event's own columns.
    const plain = join(dir, 'plain.csv');
    writeFileSync(plain, 'sampleId,unit,component,sampledAt,oilHours,Fe\nP-1,GEN-9,engine,2026-01-05T08:00:00Z,250,11.1\nP-2,GEN-9,engine,2026-02-05T08:00:00Z,500,-4\nP-3,GEN-9,engine,2026-03-05T08:00:00Z,750,18.1\n');
    const plainSize = statSync(plain).size;
    const plainOut = await onTerminal(['import', '--dry-run', plain]);
    expect(plainOut).toContain(`100% | ${plainSize}/${plainSize} bytes | 2 accepted, 1 rejected`);
    expect(plainOut).toContain('line 3 (sampleId P-2): readings.Fe:');
    // Without a terminal (the test above) and with --json nothing but the report is written.
    expect(await onTerminal(['import', '--map', 'demo/labs/engine-lab.map.yaml', '--dry-run', '--json', file])).not.toContain('bytes |');
  }, 600_000);

  it('cell text is echoed with its control characters escaped, and a unit name that mixes scripts is warned about, as in a plain import', async () => {
    const lines = readFileSync('demo/labs/engine-lab.csv', 'utf8').split('\n');
    lines[1] = lines[1]!.replace(';GEN-1;', ';G\u0415N-1;'); // a Cyrillic Е in the unit
    lines[3] = lines[3]!.replace(/;\d\d\.\d\d\.2026 \d\d:\d\d;/, ';\u001b[2J\u0007owned;');
    const file = join(dir, 'engine-hostile.csv');
    writeFileSync(file, lines.join('\n'));
    const r = await runCli(['import', '--map', 'demo/labs/engine-lab.map.yaml', '--dry-run', '--show', '1', file]);
    expect(r.code).toBe(1);
    expect(r.stderr).toContain('row 4, column "Sampled" (sampledAt): "\\x1B[2J\\x07owned" is not a date');
    expect([...r.stderr].filter((c) => c === '\u001b' || c === '\u0007')).toEqual([]);
    expect(r.stderr).toContain('row 2 (sampleId EL-4101): warning: unit: "G\u0415N-1" mixes Latin and Cyrillic letters');
    expect(r.stdout).toContain('"unit":"G\u0415N-1"');
    const json = await runCli(['import', '--map', 'demo/labs/engine-lab.map.yaml', '--dry-run', '--json', file]);
    const warnings = json.stdout.trim().split('\n').map((l) => JSON.parse(l) as { type: string }).filter((l) => l.type === 'warning');
    expect(warnings).toEqual([{ type: 'warning', row: 2, sampleId: 'EL-4101', warning: { path: 'unit', reason: expect.stringContaining('mixes Latin and Cyrillic') } }]);
  }, 600_000);

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

  it('says which Redis and key prefix it writes to before it enqueues, as a plain import does', async () => {
    const prefix = '{labimport-named}';
    const config = join(dir, 'config-named.yaml');
    writeFileSync(config, `redis:\n  prefix: "${prefix}"\n`);
    const r = await runCli(['import', '--map', 'demo/labs/gearbox-lab.map.yaml', '--config', config, 'demo/labs/gearbox-lab.xlsx'], { REDIS_URL: server.url });
    expect(r.code).toBe(0);
    const first = r.stderr.split('\n')[0]!;
    expect(first).toContain(server.url.replace(/^redis:\/\//, '').replace(/\/$/, ''));
    expect(first).toContain(prefix);
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
