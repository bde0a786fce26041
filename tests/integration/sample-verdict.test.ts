/**
 * A responder's word on a sample in doubt, end to end on a private redis-server: a bottle of new oil sent in the
 * middle of a charge is held as a sampling finding; `POST …/samples/:sampleId/verdict` with a responder token
 * confirms it, rejects it or takes the word back, and the worker evaluates the component again from that sample.
 * Who said what of the sample, and when, stays in the incident's timeline: in the API's record and in `wearshift
 * incidents show`, through every evaluation the words cause.
 */
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import type { AddressInfo } from 'node:net';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import type { Queue } from 'bullmq';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { parseConfig } from '../../src/domain/configFile.ts';
import type { Incident } from '../../src/incidents/model.ts';
import { formatTime } from '../../src/notify/format.ts';
import { buildServer } from '../../src/http/server.ts';
import { createResultProducer, type ResultProducer } from '../../src/queue/producer.ts';
import { openPartitionedQueues, openQueue, QUEUE_NAMES, resolveQueueSettings } from '../../src/queue/queues.ts';
import { SampleVerdicts } from '../../src/queue/sampleVerdicts.ts';
import { startWorkers, type RunningWorkers } from '../../src/queue/workers.ts';
import { componentKeys, Partitions } from '../../src/redis/keys.ts';
import { compactValue, expandValue } from '../../src/redis/compactText.ts';
import { RedisStore } from '../../src/redis/redisStore.ts';
import { RedisIncidents } from '../../src/redis/redisIncidents.ts';
import { incidentRules } from '../../src/incidents/policy.ts';
import { IncidentFilterSchema } from '../../src/incidents/listFilter.ts';
import { silentLogger } from '../../src/telemetry/logger.ts';
import { createMetrics } from '../../src/telemetry/metrics.ts';
import { drained } from '../helpers/queueDrain.ts';
import { replayVerdictRows, storedVerdictRows, type VerdictRow } from '../helpers/incidentVerdict.ts';
import { runCliInProcess } from '../helpers/cliInProcess.ts';
import { startRedisServer, type RedisServer } from '../helpers/redisServer.ts';
import { accessTokensFromEnv } from '../../src/runtime/accessTokensFromEnv.ts';

/** The API's tokens, handed to the routes (never written into the process environment). */
const tokenEnv: NodeJS.ProcessEnv = {};

const RESPONDER = 'resp-verdict-51c2';
const VIEWER = 'view-verdict-77aa';
const CONFIG_TEXT = `
detection: { measurands: [Fe, Cu], runningInHours: 0, baselineIntervals: 4 }
groups:
  - name: pump-gearboxes
    match: { component: gearbox }
`;
const config = parseConfig(CONFIG_TEXT);
const prefix = '{verdict}';
const ref = { unit: 'PS7-P1', component: 'gearbox' };

let redis: RedisServer;
let workers: RunningWorkers;
let producer: ResultProducer;
let queues: Queue[];
let app: Awaited<ReturnType<typeof buildServer>>;
let store: RedisStore;
let base: string;
let incidents: RedisIncidents;
let dir: string;
const saved = { ...process.env };
/** The clock the words are given by: each one a minute after the last, from a fixed instant. */
let verdictClock = Date.parse('2026-06-01T09:00:00.000Z');
const verdictTimes: string[] = [];

function event(i: number, readings: Record<string, number | string>) {
  return {
    sampleId: `V-${i}`,
    ...ref,
    sampledAt: new Date(Date.UTC(2026, 0, 1 + i * 10, 8)).toISOString(),
    unitHours: 1000 + i * 250,
    oilHours: i * 250,
    readings,
  };
}

beforeAll(async () => {
  tokenEnv.WEARSHIFT_TOKEN_RESPONDER = RESPONDER;
  tokenEnv.WEARSHIFT_TOKEN_VIEWER = VIEWER;
  redis = await startRedisServer();
  const client = redis.client();
  workers = startWorkers({ connection: client, config, logger: silentLogger() }, { prefix, backoffMs: 50 });
  const settings = resolveQueueSettings({ prefix });
  const partitions = new Partitions(prefix, 1);
  const evaluateQueues = openPartitionedQueues(QUEUE_NAMES.evaluate, client, settings, partitions);
  queues = [openQueue(QUEUE_NAMES.results, client, settings), ...evaluateQueues];
  producer = createResultProducer({ connection: client, prefix });
  store = new RedisStore(client, { prefix, config });
  incidents = new RedisIncidents(client, { rules: incidentRules(config), prefix });
  const now = () => {
    verdictClock += 60_000;
    const at = new Date(verdictClock);
    verdictTimes.push(at.toISOString());
    return at;
  };
  app = await buildServer({ tokens: accessTokensFromEnv(tokenEnv),
    logger: silentLogger(),
    metrics: createMetrics({ defaultMetrics: false }),
    ping: () => client.ping(),
    incidents,
    sampleVerdicts: new SampleVerdicts(store, evaluateQueues, partitions, { incidents, now }),
  });
  dir = mkdtempSync(join(tmpdir(), 'wearshift-verdict-'));
  writeFileSync(join(dir, 'site.yaml'), `redis:\n  prefix: '${prefix}'\n`);
  await app.listen({ port: 0, host: '127.0.0.1' });
  base = `http://127.0.0.1:${(app.server.address() as AddressInfo).port}`;
});

afterAll(async () => {
  process.env = saved;
  await app?.close();
  await producer?.close();
  await workers?.close();
  await Promise.all((queues ?? []).map((q) => q.close()));
  await redis?.dispose();
  if (dir) rmSync(dir, { recursive: true, force: true });
});

const post = (sampleId: string, body: unknown, token = RESPONDER) =>
  fetch(`${base}/v1/units/${encodeURIComponent(ref.unit)}/components/${ref.component}/samples/${encodeURIComponent(sampleId)}/verdict`, {
    method: 'POST',
    headers: { authorization: `Bearer ${token}`, 'content-type': 'application/json' },
    body: JSON.stringify(body),
  });

/** The incident as the API answers it. */
async function record(id: string): Promise<Incident> {
  const res = await fetch(`${base}/v1/incidents/${encodeURIComponent(id)}`, { headers: { authorization: `Bearer ${VIEWER}` } });
  expect(res.status).toBe(200);
  return ((await res.json()) as { incident: Incident }).incident;
}

const wordsOf = (incident: Incident) => incident.timeline.filter((e) => e.kind === 'sample-verdict');

/** `wearshift incidents show`, run in-process through the real command parser against the private server. */
function show(id: string): Promise<{ code: number; out: string }> {
  return runCliInProcess(['incidents', 'show', id, '--config', join(dir, 'site.yaml')], { REDIS_URL: redis.url });
}

async function statusOf(sampleId: string) {
  const records = await store.findings(ref);
  const at = records.find((r) => r.sampleId === sampleId);
  return { status: at?.status, sampling: (at?.findings ?? []).filter((f) => f.rule === 'sampling').map((f) => f.check) };
}

describe('a responder marks a sample in doubt', () => {
  it('holds a bottle of new oil, then follows confirmed, withdrawn and rejected through the worker', { timeout: 300_000 }, async () => {
    const healthy = [1, 2, 3, 4, 5].map((i) => event(i, { Fe: 8 + 6 * i, Cu: 2 + i, Ca: 2400, Zn: 1100, P: 950, Si: 4 }));
    const bottle = event(6, { Fe: 1, Cu: '<1', Ca: 2400, Zn: 1100, P: 950, Si: 4 });
    const after = event(7, { Fe: 52, Cu: 9, Ca: 2400, Zn: 1100, P: 950, Si: 4 });
    const outcomes = await producer.add([...healthy, bottle, after]);
    expect(outcomes.filter((o) => o.status !== 'accepted')).toEqual([]);
    await drained(queues, 120_000);
    expect(await statusOf('V-6')).toEqual({ status: 'in-doubt', sampling: ['new-oil-mid-charge'] });

    // Bad requests name the field and the reason; a viewer may look but not mark; an unknown sample is a 404.
    const bad = await post('V-6', { verdict: 'maybe', by: 'shift lead' });
    expect(bad.status).toBe(400);
    expect(((await bad.json()) as { message: string }).message).toMatch(/^body\.verdict: /);
    expect((await post('V-6', { verdict: 'confirmed' })).status).toBe(400);
    expect((await post('V-6', { verdict: 'confirmed', by: 'viewer' }, VIEWER)).status).toBe(403);
    expect((await post('V-6', { verdict: 'confirmed', by: 'nobody' }, 'no-such-token')).status).toBe(401);
    expect((await post('V-99', { verdict: 'confirmed', by: 'shift lead' })).status).toBe(404);
    // A sample nothing questioned takes no verdict: a machine's evidence is not taken out of its history by a word.
    const unquestioned = await post('V-7', { verdict: 'rejected', by: 'shift lead' });
    expect(unquestioned.status).toBe(409);
    expect(((await unquestioned.json()) as { error: string; message: string })).toMatchObject({ error: 'not-in-doubt', message: expect.stringMatching(/V-7.*not in doubt/) });
    const v7 = await statusOf('V-7');
    expect(v7.status).toBeUndefined();
    expect((await store.evaluationInput(ref))!.marks.has('V-7')).toBe(false);

    // The incident the bottle opened, before any word: nothing said of the sample yet.
    const bottleIncident = `${ref.unit}/${ref.component}/sampling@V-6`;
    expect(wordsOf(await record(bottleIncident))).toEqual([]);
    // The refused requests above left no word in any timeline.
    expect(verdictTimes).toEqual([]);

    const confirmed = await post('V-6', { verdict: 'confirmed', by: 'shift lead' });
    expect(confirmed.status).toBe(202);
    await drained(queues, 120_000);
    expect((await statusOf('V-6')).status).toBe('confirmed');
    const firstWord = { kind: 'sample-verdict', sampleId: 'V-6', verdict: 'confirmed', by: 'shift lead', at: verdictTimes[0] };
    expect(wordsOf(await record(bottleIncident))).toEqual([firstWord]);
    // The same word again (a request sent twice) is not written twice.
    expect((await post('V-6', { verdict: 'confirmed', by: 'shift lead' })).status).toBe(202);
    await drained(queues, 120_000);
    expect(wordsOf(await record(bottleIncident))).toEqual([firstWord]);

    expect((await post('V-6', { verdict: 'withdrawn', by: 'shift lead' })).status).toBe(202);
    await drained(queues, 120_000);
    expect((await statusOf('V-6')).status).toBe('in-doubt');

    expect((await post('V-6', { verdict: 'rejected', by: 'lab desk' })).status).toBe(202);
    await drained(queues, 120_000);
    expect((await statusOf('V-6')).status).toBe('rejected');
    // The sampling incident the bottle opened no longer stands: a responder answered it, and it is closed so — who
    // judged which sample how, at the time the word was given — not withdrawn as if a late result had changed the history.
    const all = await incidents.list(IncidentFilterSchema.parse({ state: 'all', unit: ref.unit }));
    const sampling = all.filter((i) => i.id.includes('sampling'));
    expect(sampling.length).toBeGreaterThan(0);
    expect(sampling.filter((i) => i.closed === null)).toEqual([]);

    // Its record says who marked the sample how, and when, in the order the words were given, through the
    // evaluations each word caused (the closed incident keeps them too).
    const final = await record(bottleIncident);
    const closure = { at: verdictTimes[3], how: 'sample-verdict', by: 'lab desk', sampleId: 'V-6', verdict: 'rejected' };
    expect(final.closed).toEqual(closure);
    expect(final.timeline.at(-1)).toEqual({ kind: 'closed', ...closure });
    expect(wordsOf(final)).toEqual([
      firstWord,
      { kind: 'sample-verdict', sampleId: 'V-6', verdict: 'withdrawn', by: 'shift lead', at: verdictTimes[2] },
      { kind: 'sample-verdict', sampleId: 'V-6', verdict: 'rejected', by: 'lab desk', at: verdictTimes[3] },
    ]);
    // The command line shows the same, each word at its time in the site zone.
    const shown = await show(bottleIncident);
    expect(shown.code).toBe(0);
    const timeline = shown.out.split('\n');
    expect(timeline).toContain(`  ${formatTime(verdictTimes[0]!, 'UTC')}  sample V-6 confirmed by shift lead: genuine, back into the trend`);
    expect(timeline).toContain(`  ${formatTime(verdictTimes[2]!, 'UTC')}  verdict on sample V-6 taken back by shift lead: the sampling check judges it again`);
    expect(timeline).toContain(`  ${formatTime(verdictTimes[3]!, 'UTC')}  sample V-6 rejected by lab desk: wrong, kept out of the trend`);
    expect(timeline).toContain(`  ${formatTime(verdictTimes[3]!, 'UTC')}  closed: sample V-6 rejected by lab desk (sample judged wrong; kept out of the trend)`);

    // Taking the rejection back reaches the closed incident's record, and the evaluation it causes brings the
    // incident back (the same sample opens it, so the same id) with every word in its timeline.
    expect((await post('V-6', { verdict: 'withdrawn', by: 'lab desk' })).status).toBe(202);
    await drained(queues, 120_000);
    expect((await statusOf('V-6')).status).toBe('in-doubt');
    const back = await record(bottleIncident);
    expect(back.closed).toBeNull();
    expect(wordsOf(back).map((w) => w.kind === 'sample-verdict' && `${w.verdict} by ${w.by} at ${w.at}`)).toEqual([
      `confirmed by shift lead at ${verdictTimes[0]}`,
      `withdrawn by shift lead at ${verdictTimes[2]}`,
      `rejected by lab desk at ${verdictTimes[3]}`,
      `withdrawn by lab desk at ${verdictTimes[4]}`,
    ]);
  });
});

/**
 * Sample `i` of a component whose iron gains 6 ppm per 250 h up to sample 6, then 10 ppm (a lasting change of duty),
 * without lab noise; at `bottle`, a bottle of new oil sent in the middle of the charge.
 */
function changeOfDuty(of: { unit: string; component: string }, prefix: string, i: number, bottle?: number) {
  return {
    sampleId: `${prefix}-${i}`,
    ...of,
    sampledAt: new Date(Date.UTC(2026, 0, 1 + i * 10, 8)).toISOString(),
    unitHours: 1000 + i * 250,
    oilHours: i * 250,
    readings: i === bottle ? { Fe: 1, Cu: '<1', Ca: 2400, Zn: 1100, P: 950, Si: 4 } : { Fe: i <= 6 ? 8 + 6 * i : 44 + 10 * (i - 6), Cu: 2 + i * 0.5, Ca: 2400, Zn: 1100, P: 950, Si: 4 },
  };
}

/** A responder's verdict on a sample of the component, through the API. */
const verdictOn = (of: { unit: string; component: string }) => (sampleId: string, body: unknown) =>
  fetch(`${base}/v1/units/${of.unit}/components/${of.component}/samples/${sampleId}/verdict`, {
    method: 'POST',
    headers: { authorization: `Bearer ${RESPONDER}`, 'content-type': 'application/json' },
    body: JSON.stringify(body),
  });

describe('a responder says a signalled rate is the usual one', () => {
  const gearbox = { unit: 'PS7-P2', component: 'gearbox' };
  const rated = (i: number) => changeOfDuty(gearbox, 'R', i);
  const postOn = verdictOn(gearbox);
  const risesAfter = async (from: number) =>
    (await store.findings(gearbox))
      .filter((r) => Number(r.sampleId.slice(2)) > from && r.findings.some((f) => (f.rule === 'cusum' || f.rule === 'ewma') && f.direction === 'up'))
      .map((r) => r.sampleId);

  it('ends the standing watch: the detectors learn a new baseline from the word on; taking the word back restores it', { timeout: 300_000 }, async () => {
    const feed = async (from: number, to: number) => {
      const outcomes = await producer.add(Array.from({ length: to - from + 1 }, (_, k) => rated(from + k)));
      expect(outcomes.filter((o) => o.status !== 'accepted')).toEqual([]);
      await drained(queues, 120_000);
    };
    await feed(1, 16);
    const watch = `${gearbox.unit}/${gearbox.component}@R-14`;
    const standing = await record(watch);
    expect(standing.alarm).toBe('active');
    expect(standing.evidence.map((f) => `${f.rule} ${f.direction} ${f.measurand}`)).toEqual(['cusum up Fe']);

    // Only a sample where a detector signals a rise takes the word.
    const early = await postOn('R-10', { verdict: 'usual-rate', by: 'reliability engineer' });
    expect(early.status).toBe(409);
    expect((await early.json()) as { error: string }).toMatchObject({ error: 'no-rise' });
    expect((await store.evaluationInput(gearbox))!.marks.has('R-10')).toBe(false);

    const words = verdictTimes.length;
    expect((await postOn('R-16', { verdict: 'usual-rate', by: 'reliability engineer' })).status).toBe(202);
    await drained(queues, 120_000);
    await feed(17, 22);
    expect(await risesAfter(16)).toEqual([]);
    const settled = await record(watch);
    expect(settled.alarm).toBe('returned');
    expect(wordsOf(settled)).toEqual([{ kind: 'sample-verdict', sampleId: 'R-16', verdict: 'usual-rate', by: 'reliability engineer', at: verdictTimes[words] }]);

    // Taken back, the history is judged again without it: the held rate flags the new one again.
    expect((await postOn('R-16', { verdict: 'withdrawn', by: 'reliability engineer' })).status).toBe(202);
    await drained(queues, 120_000);
    expect(await risesAfter(16)).toEqual(['R-17', 'R-18', 'R-19', 'R-20', 'R-21', 'R-22']);
    expect((await record(watch)).alarm).toBe('active');
  });
});

describe('the words a live store holds, given to replay', () => {
  const drive = { unit: 'PS7-D1', component: 'drive' };
  /** D-17 is a bottle of new oil sent in the middle of the charge. */
  const reading = (i: number) => changeOfDuty(drive, 'D', i, 17);
  const postOn = verdictOn(drive);
  const mine = (rows: VerdictRow[]) => rows.filter((r) => r.incidentId.startsWith(`${drive.unit}/`));

  it('exported with `wearshift sample-verdicts`, give replay the live verdict; without them replay differs', { timeout: 300_000 }, async () => {
    const events = Array.from({ length: 20 }, (_, k) => reading(k + 1));
    const feed = async (from: number, to: number) => {
      const outcomes = await producer.add(events.slice(from - 1, to));
      expect(outcomes.filter((o) => o.status !== 'accepted')).toEqual([]);
      await drained(queues, 120_000);
    };
    await feed(1, 16);
    const rises = (await store.findings(drive)).filter((r) => r.findings.some((f) => (f.rule === 'cusum' || f.rule === 'ewma') && f.direction === 'up')).map((r) => r.sampleId);
    expect(rises.length).toBeGreaterThan(0);
    expect((await postOn(rises.at(-1)!, { verdict: 'usual-rate', by: 'reliability engineer' })).status).toBe(202);
    await drained(queues, 120_000);
    await feed(17, 20);
    expect((await store.findings(drive)).find((r) => r.sampleId === 'D-17')?.status).toBe('in-doubt');
    expect((await postOn('D-17', { verdict: 'rejected', by: 'lab desk' })).status).toBe(202);
    await drained(queues, 120_000);

    const exported = await runCliInProcess(['sample-verdicts', '--config', join(dir, 'site.yaml')], { REDIS_URL: redis.url });
    expect(exported.code).toBe(0);
    const words = exported.out.trim().split('\n').map((l) => JSON.parse(l) as Record<string, string>).filter((w) => w.unit === drive.unit);
    // In the order given, each with who gave it and when (the times the API's clock gave).
    // `after`: the latest sample when the word was given, where replay gives it.
    expect(words.map(({ sampleId, verdict, by, after }) => ({ sampleId, verdict, by, after }))).toEqual([
      { sampleId: rises.at(-1), verdict: 'usual-rate', by: 'reliability engineer', after: 'D-16' },
      { sampleId: 'D-17', verdict: 'rejected', by: 'lab desk', after: 'D-20' },
    ]);
    expect(words.every((w) => verdictTimes.includes(w.at!))).toBe(true);

    const results = join(dir, 'drive.jsonl');
    const wordsFile = join(dir, 'words.jsonl');
    const replayConfig = join(dir, 'replay.yaml');
    writeFileSync(results, events.map((e) => JSON.stringify(e)).join('\n') + '\n');
    writeFileSync(wordsFile, words.map((w) => JSON.stringify(w)).join('\n') + '\n');
    writeFileSync(replayConfig, CONFIG_TEXT);
    const live = mine(await storedVerdictRows(incidents, { withoutWithdrawn: true }));
    expect(live.some((r) => r.closed === 'sample-verdict')).toBe(true);

    const withWords = await runCliInProcess(['replay', results, '--config', replayConfig, '--json', '--sample-verdicts', wordsFile]);
    expect(withWords.code).toBe(0);
    expect(mine(replayVerdictRows(withWords.out))).toEqual(live);
    // The words are in the replayed timeline, with who gave them and when.
    const lines = withWords.out.trim().split('\n').map((l) => JSON.parse(l) as Record<string, unknown>);
    expect(lines.filter((l) => l.change === 'sample-verdict').map((l) => `${l.sampleId} ${l.verdict} ${l.by} ${l.at}`)).toEqual(
      expect.arrayContaining(words.map((w) => `${w.sampleId} ${w.verdict} ${w.by} ${w.at}`)),
    );

    const without = await runCliInProcess(['replay', results, '--config', replayConfig, '--json']);
    expect(mine(replayVerdictRows(without.out))).not.toEqual(live);

    // The backtest takes the same words: the sampling incident the rejected bottle opened is closed by the word there too.
    type Summary = { sampleVerdicts: unknown; runs: { episodes: { incidentId: string; state: string }[] }[] };
    const backtested = async (...extra: string[]) => {
      const run = await runCliInProcess(['backtest', results, '--config', replayConfig, '--json', ...extra]);
      expect(run.code).toBe(0);
      return JSON.parse(run.out) as Summary;
    };
    const [withTheWords, withoutWords] = [await backtested('--sample-verdicts', wordsFile), await backtested()];
    expect(withTheWords.sampleVerdicts).toEqual({ words: 2, refused: [0] });
    expect(withoutWords.sampleVerdicts).toBeNull();
    const bottleEpisode = (s: Summary) => s.runs[0]!.episodes.find((e) => e.incidentId === 'PS7-D1/drive/sampling@D-17')?.state;
    expect(bottleEpisode(withTheWords)).toBe('closed');
    expect(bottleEpisode(withoutWords)).not.toBe('closed');

    // A word its sample does not take is named and not given: exit code 1, the rest replayed.
    writeFileSync(wordsFile, [...words, { ...drive, sampleId: 'D-3', verdict: 'confirmed' }, { ...drive, sampleId: 'D-99', verdict: 'rejected' }].map((w) => JSON.stringify(w)).join('\n'));
    const refused = await runCliInProcess(['replay', results, '--config', replayConfig, '--json', '--sample-verdicts', wordsFile]);
    expect(refused.code).toBe(1);
    const refusals = refused.out.trim().split('\n').map((l) => JSON.parse(l) as Record<string, unknown>).filter((l) => l.type === 'refused-verdict');
    expect(refusals).toEqual([
      { type: 'refused-verdict', line: 3, ...drive, sampleId: 'D-3', verdict: 'confirmed', reason: expect.stringContaining('not in doubt') },
      { type: 'refused-verdict', line: 4, ...drive, sampleId: 'D-99', verdict: 'rejected', reason: expect.stringContaining('no such sample') },
    ]);
    expect(mine(replayVerdictRows(refused.out))).toEqual(live);

    // A line that is not a word: named by file, line, field and reason, and nothing is replayed.
    writeFileSync(wordsFile, `${JSON.stringify(words[0])}\n{"unit":"PS7-D1","component":"drive","sampleId":"D-17","verdict":"maybe"}\n`);
    const bad = await runCliInProcess(['replay', results, '--config', replayConfig, '--json', '--sample-verdicts', wordsFile]);
    expect(bad.code).toBe(2);
    expect(bad.out).toBe('');

    const evaluationKey = componentKeys(new Partitions(prefix, 1).tag(0), drive).evaluation;
    const client = redis.client();
    const exportedWords = async () => {
      const run = await runCliInProcess(['sample-verdicts', '--config', join(dir, 'site.yaml')], { REDIS_URL: redis.url });
      expect(run.code).toBe(0);
      return run.out.trim().split('\n').map((l) => JSON.parse(l) as Record<string, string>).filter((w) => w.unit === drive.unit);
    };
    // Words stored before who gave them was kept with them are read off the component's action log.
    const kept = (await client.hget(evaluationKey, 'words'))!;
    await client.hdel(evaluationKey, 'words');
    expect(await exportedWords()).toEqual(words);
    await client.hset(evaluationKey, 'words', kept);

    // Long after, the component's action log (its latest 500 actions) no longer holds the words, and the incidents'
    // timelines never said after which sample they came: the export still says it, from what was kept with each word.
    const held = JSON.parse(expandValue((await client.hgetBuffer(evaluationKey, 'incidents'))!)) as { actions: unknown[] };
    expect(held.actions.length).toBeGreaterThan(0);
    await client.hset(evaluationKey, 'incidents', compactValue(JSON.stringify({ ...held, actions: [] })));
    expect(await exportedWords()).toEqual(words);
  });
});

describe('a responder gives a word from the terminal', () => {
  const pump = { unit: 'PS7-T1', component: 'gearbox' };
  const give = (...args: string[]) => runCliInProcess(['sample-verdicts', 'give', pump.unit, pump.component, ...args, '--config', join(dir, 'site.yaml')], { REDIS_URL: redis.url });

  it('takes it as the API does: stored, in the timeline, the component judged again; refusals exit 2', { timeout: 300_000 }, async () => {
    const outcomes = await producer.add(Array.from({ length: 8 }, (_, k) => changeOfDuty(pump, 'T', k + 1, 6)));
    expect(outcomes.filter((o) => o.status !== 'accepted')).toEqual([]);
    await drained(queues, 120_000);
    expect((await store.findings(pump)).find((r) => r.sampleId === 'T-6')?.status).toBe('in-doubt');

    // Refused as the API refuses them, and nothing stored.
    expect((await give('T-7', '--verdict', 'rejected', '--by', 'shift lead')).code).toBe(2);
    expect((await give('T-99', '--verdict', 'confirmed', '--by', 'shift lead')).code).toBe(2);
    expect((await give('T-6', '--verdict', 'maybe', '--by', 'shift lead')).code).toBe(2);
    expect((await give('T-6', '--verdict', 'confirmed', '--by', 'two\nlines')).code).toBe(2);
    expect((await store.evaluationInput(pump))!.marks.size).toBe(0);

    const taken = await give('T-6', '--verdict', 'confirmed', '--by', 'terminal shift lead', '--json');
    expect(taken.code).toBe(0);
    expect(JSON.parse(taken.out)).toEqual({ ...pump, sampleId: 'T-6', verdict: 'confirmed', by: 'terminal shift lead' });
    await drained(queues, 120_000);
    expect((await store.findings(pump)).find((r) => r.sampleId === 'T-6')?.status).toBe('confirmed');
    const bottle = await record(`${pump.unit}/${pump.component}/sampling@T-6`);
    expect(wordsOf(bottle).map((w) => w.kind === 'sample-verdict' && `${w.verdict} by ${w.by}`)).toEqual(['confirmed by terminal shift lead']);
  });
});
