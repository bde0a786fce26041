/**
 * Poison jobs put on the queues directly (an integrator's own producer that skipped validation), in the
 * middle of a stream of good results, against a real worker process: each fails at once with its reason,
 * `wearshift failed list --json` names them, and the good results around them are all stored.
 * (The in-process case with one bad measurand and `failed retry`: tests/integration/queue-failed.test.ts.)
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { createResultProducer } from '../../src/queue/producer.ts';
import { inventedFleet } from '../helpers/fleetCsv.ts';
import { runCli } from '../helpers/cli.ts';
import { startWearshift, stopAll } from '../helpers/processes.ts';
import { PREFIX, settled, startScenario, storageAgainst, type Scenario } from './scenario.ts';

let scenario: Scenario;

beforeAll(async () => {
  scenario = await startScenario({});
});

afterAll(async () => {
  await stopAll();
  await scenario?.dispose();
});

interface Listed {
  ref: string;
  queue: string;
  subject?: string;
  attempts: number;
  reason: string;
}

function nested(depth: number): unknown {
  let v: unknown = 1;
  for (let i = 0; i < depth; i++) v = { a: v };
  return v;
}

describe('poison jobs', () => {
  it('fail with their reasons and leave the other jobs alone', async () => {
    const fleet = inventedFleet({ units: 3, samplesPerUnit: 20, seed: 5 });
    const good = fleet[0]!;
    const poison: Array<{ data: unknown; expect: RegExp; subject?: string }> = [
      { data: { ...good, sampleId: 'BAD-1', readings: { Fe: 'lots' } }, expect: /^invalid result \(sampleId BAD-1\): readings\.Fe: /, subject: 'BAD-1' },
      // JSON has no NaN: BullMQ's JSON turns it into null, which the schema refuses as a reading.
      { data: { ...good, sampleId: 'BAD-2', readings: { Fe: Number.NaN } }, expect: /sampleId BAD-2.*readings\.Fe: expected a finite number/, subject: 'BAD-2' },
      { data: { ...good, sampleId: 'BAD-3', unit: 'LS1\r\nBcc: all@plant.example' }, expect: /sampleId BAD-3.*unit: unit may hold letters/, subject: 'BAD-3' },
      { data: { ...good, sampleId: 'BAD-4', oilHours: -5 }, expect: /sampleId BAD-4.*oilHours: oilHours must not be negative/, subject: 'BAD-4' },
      { data: { ...good, sampleId: 'BAD-5', readings: nested(200) }, expect: /sampleId BAD-5.*readings/, subject: 'BAD-5' },
      { data: 'not an event at all', expect: /^invalid result: \(record\): .*expected object, received string/ },
      { data: null, expect: /^invalid result: \(record\): .*expected object, received null/ },
      { data: [good], expect: /^invalid result: \(record\): .*expected object, received array/ },
    ];
    const worker = await startWearshift('worker', { env: scenario.env() });
    const producer = createResultProducer({ connection: scenario.client, prefix: PREFIX });
    const chunk = Math.ceil(fleet.length / poison.length);
    for (let i = 0; i < poison.length; i++) {
      expect((await producer.add(fleet.slice(i * chunk, (i + 1) * chunk))).every((o) => o.status === 'accepted')).toBe(true);
      await scenario.queues.results.add('result', poison[i]!.data);
    }
    await scenario.queues.evaluate.add('evaluate', { unit: 5, component: ['gearbox'] });
    await producer.close();
    await settled(scenario, fleet.length, 60_000);

    for (const c of await storageAgainst(scenario, fleet)) expect(c).toEqual({ component: c.component, sent: 20, stored: 20, revisions: 20, registry: 20 });

    const listed = await runCli(['failed', 'list', '--json'], scenario.env());
    expect(listed.code).toBe(0);
    const jobs = listed.stdout.trim().split('\n').map((l) => JSON.parse(l) as Listed);
    const results = jobs.filter((j) => j.queue === 'results');
    expect(results).toHaveLength(poison.length);
    for (const p of poison) {
      const found = results.filter((j) => p.expect.test(j.reason));
      expect(found, `a failed job matching ${p.expect}`).toHaveLength(1);
      // Unrecoverable: retrying cannot fix the data, so there was one attempt only.
      expect(found[0]!.attempts).toBe(1);
      if (p.subject !== undefined) expect(found[0]!.subject).toBe(p.subject);
    }
    const evaluate = jobs.filter((j) => j.queue === 'evaluate');
    expect(evaluate).toHaveLength(1);
    expect(evaluate[0]!.reason).toMatch(/evaluate job: data must be/);
    expect(evaluate[0]!.attempts).toBe(1);
    // The worker is still there and still ready.
    expect((await fetch(`${worker.url}/readyz`)).status).toBe(200);
    expect(await worker.stop()).toBe(0);
  });
});
