/**
 * A worker process killed with SIGKILL in the middle of a backfill, and another started in its place: the
 * jobs it held stall and BullMQ hands them to the new worker. Once with one job per result, once with the backfill
 * sent as history jobs (a killed history job is taken up again whole: its results already stored are recognised). Every accepted result must be stored once,
 * and every notification the incident timelines record as sent must reach the real SMTP server and the real
 * webhook receiver under its idempotency key exactly once (a message the timeline records as held back, its incident
 * having changed meanwhile, is not sent; one held back after an attempt had begun may have arrived). Both receivers record raw deliveries; a raw repeat
 * is allowed only for a message the dead worker was delivering when it was killed (at-least-once delivery:
 * the repeat carries the same Message-ID / webhook-id, for the receiver to drop).
 */
import { afterEach, beforeEach, describe, expect, it } from 'vitest';
import type { NotifyEffect } from '../../src/incidents/model.ts';
import { validateBatch } from '../../src/intake/validate.ts';
import { createResultProducer } from '../../src/queue/producer.ts';
import { inventedFleet } from '../helpers/fleetCsv.ts';
import { freePort } from '../helpers/redisServer.ts';
import { startWearshift, stopAll, waitFor } from '../helpers/processes.ts';
import { mailReceiver, webhookReceiver, type MailReceiver, type WebhookReceiver } from './peers.ts';
import { allIncidents, effectKeyOf, PREFIX, recordedNotifications, settled, startScenario, storageAgainst, storedCount, type Scenario } from './scenario.ts';

let scenario: Scenario;
let smtp: MailReceiver;
let hooks: WebhookReceiver;

// Each case on a fresh Redis and fresh receivers.
beforeEach(async () => {
  smtp = mailReceiver(await freePort());
  await smtp.start();
  hooks = await webhookReceiver();
  scenario = await startScenario({ smtpPort: smtp.port, webhookUrl: hooks.url });
});

afterEach(async () => {
  await stopAll();
  await scenario?.dispose();
  await smtp?.stop();
  await hooks?.close();
});

/** How the backfill is sent: one job per result, or history jobs (`wearshift import --history`). */
type Sending = 'one job per result' | 'history jobs of 300 results';

describe('a worker killed mid-backfill', () => {
  it('loses nothing: one stored copy per result, every recorded notification delivered, repeated only if it was in flight at the kill', async () => {
    await crashMidBackfill('one job per result', 7);
  });

  it('sent as history jobs, loses nothing either: the history job it held is taken up again and finished', async () => {
    await crashMidBackfill('history jobs of 300 results', 8);
  });
});

async function crashMidBackfill(sending: Sending, seed: number): Promise<void> {
  // 50 gearboxes × 60 samples; the fleet's in-control iron climbs past the 45 ppm caution level late in
  // many drains, so dozens of incidents open and notify while the backfill runs.
  const fleet = inventedFleet({ units: 50, samplesPerUnit: 60, seed });
  // History jobs are evaluated on two history threads: the kill stops them mid-evaluation too.
  const args = sending === 'one job per result' ? [] : ['--history-threads', '2'];
  const first = await startWearshift('worker', { env: scenario.env(hooks.secret), args });
  const producer = createResultProducer({ connection: scenario.client, prefix: PREFIX });
  // A history goes in sampling-time order, as a lab export lists it.
  const byTime = [...fleet].sort((a, b) => Date.parse(a.sampledAt) - Date.parse(b.sampledAt));
  const outcomes =
    sending === 'one job per result' ? await producer.add(fleet) : await producer.enqueueHistory(validateBatch(byTime, { now: Date.now() }).accepted, 300);
  await producer.close();
  expect(outcomes).toHaveLength(fleet.length);
  expect(outcomes.filter((o) => o.status !== 'accepted')).toEqual([]);

  await waitFor('a few hundred results stored', async () => (await storedCount(scenario)) >= 400, 90_000, 20);
  await first.crash();
  expect(await first.exited).toEqual({ code: null, signal: 'SIGKILL' });
  const killedAt = Date.now();
  // The dead worker's jobs stay listed as active until their locks run out: exactly what it held.
  const activeAtKill = await Promise.all([scenario.queues.results.getActiveCount(), scenario.queues.history.getActiveCount(), scenario.queues.evaluate.getActiveCount(), scenario.queues.notify.getActiveCount()]);
  const notifyInFlight = (await scenario.queues.notify.getActive()).map((j) => j.data as NotifyEffect);
  const storedAtKill = await storedCount(scenario);
  expect(storedAtKill).toBeLessThan(fleet.length);

  // The receivers here time a message when they have read it, not when it was sent: a request the dead worker had
  // written before the kill may still be read after it. A repeat can only come from the second worker, started now.
  const restartedAt = Date.now();
  const second = await startWearshift('worker', { env: scenario.env(hooks.secret), args });
  // The killed worker's jobs come back only when their locks (30 s) have run out.
  await settled(scenario, fleet.length, 180_000).catch((e: Error) => {
    throw new Error(`${e.message}\nlast lines of the second worker:\n${second.output().slice(-4000)}`);
  });

  const recoveryMs = Date.now() - killedAt;
  const perComponent = await storageAgainst(scenario, fleet);
  expect(perComponent).toHaveLength(50);
  for (const c of perComponent) expect(c).toEqual({ component: c.component, sent: 60, stored: 60, revisions: 60, registry: 60 });

  const incidents = await allIncidents(scenario);
  const told = recordedNotifications(incidents);
  expect(incidents.length).toBeGreaterThan(0);
  expect(told.byChannel.webhook.length).toBeGreaterThan(0);

  // Webhooks: the webhook-id is the notification's idempotency key (the effect key, percent-encoded).
  // Every message the timelines say went out, and beside them only messages held back after an attempt had begun.
  const delivered = hooks.delivered();
  const deliveredKeys = [...delivered.keys()].map(effectKeyOf);
  expect(deliveredKeys.filter((k) => told.byChannel.webhook.includes(k)).sort()).toEqual([...told.byChannel.webhook].sort());
  expect(deliveredKeys.filter((k) => !told.byChannel.webhook.includes(k) && !told.mayHaveArrived.webhook.includes(k))).toEqual([]);
  expect(hooks.attempts.every((a) => a.verified)).toBe(true);
  // As for e-mail below: only a delivery the dead worker had made but not recorded may come twice.
  const hookRepeats = [...delivered.entries()].filter(([, n]) => n > 1).map(([id]) => id);
  for (const id of hookRepeats) {
    const ok = hooks.attempts.filter((a) => a.id === id && a.answer === 204);
    expect(ok).toHaveLength(2);
    expect(ok[1]!.at).toBeGreaterThan(restartedAt);
    expect(notifyInFlight.some((e) => e.channel === 'webhook' && e.key === effectKeyOf(id))).toBe(true);
  }

  // E-mail: one Message-ID per recorded e-mail notification (the Message-ID derives from the idempotency
  // key), each about a known incident.
  // A message held back after an attempt had begun may have arrived or not (`mayHaveArrived`).
  const distinct = [...new Map(smtp.mails.map((m) => [m.messageId, m])).values()];
  expect(distinct.length).toBeGreaterThanOrEqual(told.byChannel.email.length);
  expect(distinct.length).toBeLessThanOrEqual(told.byChannel.email.length + told.mayHaveArrived.email.length);
  const mailsPerIncident = (id: string) => distinct.filter((m) => m.incidentId === id).length;
  for (const inc of incidents) {
    const of = (keys: string[]) => keys.filter((k) => k.startsWith(`${inc.id}:`)).length;
    expect(mailsPerIncident(inc.id)).toBeGreaterThanOrEqual(of(told.byChannel.email));
    expect(mailsPerIncident(inc.id)).toBeLessThanOrEqual(of(told.byChannel.email) + of(told.mayHaveArrived.email));
  }
  // Delivery is at least once: a message the dead worker had sent but not yet recorded as sent goes out
  // again, with the same Message-ID. Only such messages may repeat, once: the job among those the dead worker
  // held, the repeat from the worker started after the kill. (The job names the event in full, `wearshift.incident.opened`;
  // the mail's X-Wearshift-Event header names it short, `opened`.)
  const repeats = smtp.mails.filter((m, i) => smtp.mails.findIndex((o) => o.messageId === m.messageId) !== i);
  for (const again of repeats) {
    const original = smtp.mails.find((m) => m.messageId === again.messageId)!;
    expect(smtp.mails.filter((m) => m.messageId === again.messageId)).toHaveLength(2);
    expect(original.at).toBeLessThanOrEqual(again.at);
    expect(again.at).toBeGreaterThan(restartedAt);
    expect(notifyInFlight.some((e) => e.channel === 'email' && e.incidentId === again.incidentId && e.type === `wearshift.incident.${again.event}`)).toBe(true);
  }
  expect(repeats.length + hookRepeats.length).toBeLessThanOrEqual(notifyInFlight.length);

  const failed = await Promise.all(Object.values(scenario.queues).map((q) => q.getFailedCount()));
  expect(failed).toEqual(Object.values(scenario.queues).map(() => 0));
  console.info(
    `worker crash (${sending}): killed at ${storedAtKill}/${fleet.length} stored with active jobs ${JSON.stringify(activeAtKill)} (results, history, evaluate, notify); ` +
      `${incidents.length} incidents, ${told.byChannel.webhook.length} webhook and ${told.byChannel.email.length} e-mail notifications, each delivered (repeated after the kill: ${repeats.length} e-mail, ${hookRepeats.length} webhook; ${notifyInFlight.length} notifications in flight at the kill); settled ${(recoveryMs / 1000).toFixed(1)} s after the kill`,
  );
  await second.stop();
}
