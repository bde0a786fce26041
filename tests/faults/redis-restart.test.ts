/**
 * Redis restarted in the middle of a stream (append-only file on, same port, same directory): the worker
 * process reports itself not ready while Redis is away, reconnects by itself when it is back, and goes on
 * where it stopped. Nothing accepted is lost, nothing is stored or told twice.
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { createResultProducer } from '../../src/queue/producer.ts';
import { inventedFleet } from '../helpers/fleetCsv.ts';
import { freePort } from '../helpers/redisServer.ts';
import { startWearshift, stopAll, waitFor } from '../helpers/processes.ts';
import { mailReceiver, webhookReceiver, type MailReceiver, type WebhookReceiver } from './peers.ts';
import { allIncidents, effectKeyOf, PREFIX, recordedNotifications, settled, startScenario, storageAgainst, storedCount, type Scenario } from './scenario.ts';

let scenario: Scenario;
let smtp: MailReceiver;
let hooks: WebhookReceiver;

beforeAll(async () => {
  smtp = mailReceiver(await freePort());
  await smtp.start();
  hooks = await webhookReceiver();
  scenario = await startScenario({ smtpPort: smtp.port, webhookUrl: hooks.url, appendOnly: true });
});

afterAll(async () => {
  await stopAll();
  await scenario?.dispose();
  await smtp?.stop();
  await hooks?.close();
});

const readiness = async (url: string) => (await fetch(`${url}/readyz`, { signal: AbortSignal.timeout(3000) }).catch(() => undefined))?.status;

describe('Redis restarted mid-stream', () => {
  it('the worker waits, reconnects and finishes; every result stored once, every notification told once', async () => {
    const fleet = inventedFleet({ units: 20, samplesPerUnit: 60, seed: 11 });
    const worker = await startWearshift('worker', { env: scenario.env(hooks.secret) });
    const producer = createResultProducer({ connection: scenario.client, prefix: PREFIX });
    expect((await producer.add(fleet)).every((o) => o.status === 'accepted')).toBe(true);
    await producer.close();

    await waitFor('a few hundred results stored', async () => (await storedCount(scenario)) >= 300, 90_000, 20);
    const before = await storedCount(scenario);
    await scenario.redis.stop();
    await waitFor('the worker to report itself not ready', async () => (await readiness(worker.url)) === 503, 10_000, 200);
    // Long enough for every connection of the worker to notice and start its reconnection attempts.
    await new Promise((r) => setTimeout(r, 3000));
    await scenario.redis.start();
    await waitFor('the worker to report itself ready again', async () => (await readiness(worker.url)) === 200, 30_000, 200);
    // The append-only file brought back everything stored before the stop.
    expect(await storedCount(scenario)).toBeGreaterThanOrEqual(before);

    await settled(scenario, fleet.length, 180_000).catch((e: Error) => {
      throw new Error(`${e.message}\nlast lines of the worker:\n${worker.output().slice(-4000)}`);
    });
    expect(worker.output()).toMatch(/redis connection restored/);

    const perComponent = await storageAgainst(scenario, fleet);
    expect(perComponent).toHaveLength(20);
    for (const c of perComponent) expect(c).toEqual({ component: c.component, sent: 60, stored: 60, revisions: 60, registry: 60 });

    const told = recordedNotifications(await allIncidents(scenario));
    expect(told.byChannel.webhook.length).toBeGreaterThan(0);
    const delivered = hooks.delivered();
    expect([...delivered.keys()].map(effectKeyOf).sort()).toEqual([...told.byChannel.webhook].sort());
    expect([...delivered.entries()].filter(([, n]) => n !== 1)).toEqual([]);
    expect(smtp.mails).toHaveLength(told.byChannel.email.length);
    expect(new Set(smtp.mails.map((m) => m.messageId)).size).toBe(smtp.mails.length);
    expect(await Promise.all(Object.values(scenario.queues).map((q) => q.getFailedCount()))).toEqual(Object.values(scenario.queues).map(() => 0));
    console.info(`redis restart: stopped at ${before}/${fleet.length} stored; ${told.byChannel.webhook.length} webhook and ${told.byChannel.email.length} e-mail notifications, each delivered once`);
    expect(await worker.stop()).toBe(0);
  });

  it('wearshift serve answers 503 with Retry-After while Redis is away, accepts nothing half, and takes results again after', async () => {
    const token = 'ingest-restart-5a1c';
    const viewer = 'viewer-restart-7e20';
    const responder = 'responder-restart-c41b';
    const serve = await startWearshift('serve', { env: { ...scenario.env(hooks.secret), WEARSHIFT_TOKEN_INGEST: token, WEARSHIFT_TOKEN_VIEWER: viewer, WEARSHIFT_TOKEN_RESPONDER: responder } });
    const send = (sampleId: string) =>
      fetch(`${serve.url}/v1/results`, {
        method: 'POST',
        headers: { authorization: `Bearer ${token}`, 'content-type': 'application/json' },
        body: JSON.stringify({ sampleId, unit: 'LS90-Marsh Lane', component: 'gearbox', sampledAt: '2025-06-01T08:00:00Z', oilHours: 10, readings: { Fe: 4 } }),
        signal: AbortSignal.timeout(10_000),
      });
    const first = await send('RS-1');
    // Seen once on a loaded machine: a 500 here. What serve said then is the clue.
    expect(first.status, first.status === 202 ? '' : `${await first.text()}\nlast lines of serve:\n${serve.output().slice(-4000)}`).toBe(202);
    await scenario.redis.stop();
    await waitFor('serve to report itself not ready', async () => (await readiness(serve.url)) === 503, 10_000, 200);
    const during = await send('RS-2');
    expect(during.status).toBe(503);
    expect(during.headers.get('retry-after')).toBe('5');
    expect(await during.json()).toMatchObject({ error: 'unavailable', message: expect.stringMatching(/send the records again in 5 s \(a result sent twice is stored once\)/) });
    // The reading and acting routes too, as the running process wires them: 503 with Retry-After, never 500.
    const component = `/v1/units/${encodeURIComponent('LS90-Marsh Lane')}/components/gearbox`;
    const incident = `/v1/incidents/${encodeURIComponent('LS90-Marsh Lane/gearbox@RS-1')}`;
    const asViewer = { authorization: `Bearer ${viewer}` };
    const asResponder = { authorization: `Bearer ${responder}`, 'content-type': 'application/json' };
    for (const [path, init] of [
      ['/v1/incidents', { headers: asViewer }],
      [incident, { headers: asViewer }],
      [`${incident}/ack`, { method: 'POST', headers: asResponder, body: JSON.stringify({ by: 'R. Tanaka' }) }],
      [`${component}/series?measurand=Fe&measurand=Cu`, { headers: asViewer }],
      [`${component}/chart.svg?measurand=Fe`, { headers: asViewer }],
      [`${component}/samples/RS-1/verdict`, { method: 'POST', headers: asResponder, body: JSON.stringify({ verdict: 'confirmed', by: 'R. Tanaka' }) }],
    ] as [string, RequestInit][]) {
      const res = await fetch(`${serve.url}${path}`, { ...init, signal: AbortSignal.timeout(30_000) });
      const text = await res.text();
      expect(`${path} ${res.status} ${res.headers.get('retry-after')}`, text).toBe(`${path} 503 5`);
    }
    // The metrics need no Redis to answer: what could not be read (queue depth, alarm figures) is left out or stale.
    const metrics = await fetch(`${serve.url}/metrics`, { headers: asViewer, signal: AbortSignal.timeout(30_000) });
    expect(metrics.status, await metrics.text()).toBe(200);
    await scenario.redis.start();
    await waitFor('serve to report itself ready again', async () => (await readiness(serve.url)) === 200, 30_000, 200);
    expect((await send('RS-3')).status).toBe(202);
    const ref = { unit: 'LS90-Marsh Lane', component: 'gearbox' };
    await waitFor('RS-1 and RS-3 stored', async () => ((await scenario.storage.component(ref))?.samples ?? 0) >= 2, 30_000, 100);
    expect((await scenario.storage.revisions(ref)).map((r) => r.sample.sampleId).sort()).toEqual(['RS-1', 'RS-3']);
    expect(await serve.stop()).toBe(0);
  });
});
