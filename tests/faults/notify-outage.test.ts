/**
 * Receivers that are away, slow or failing, against a real worker process. The mail server is down for a
 * while and then up: the mail arrives late, once. The webhook receiver answers 500, then too slowly, then
 * 503 with Retry-After, and only then 2xx: the worker retries with backoff (full jitter from 5 s, doubling;
 * src/notify/retryTiming.ts), honours Retry-After (RFC 9110 §10.2.3) and delivers once. Neither receiver
 * de-duplicates anything.
 */
import { afterEach, describe, expect, it } from 'vitest';
import { createResultProducer } from '../../src/queue/producer.ts';
import { DEFAULT_BACKOFF } from '../../src/notify/retryTiming.ts';
import { inventedFleet } from '../helpers/fleetCsv.ts';
import { freePort } from '../helpers/redisServer.ts';
import { startWearshift, stopAll, waitFor } from '../helpers/processes.ts';
import { mailReceiver, webhookReceiver, type Answer, type MailReceiver, type WebhookReceiver } from './peers.ts';
import { allIncidents, effectKeyOf, PREFIX, recordedNotifications, settled, startScenario, type Scenario } from './scenario.ts';

let scenario: Scenario | undefined;
let smtp: MailReceiver | undefined;
let hooks: WebhookReceiver | undefined;

afterEach(async () => {
  await stopAll();
  await scenario?.dispose();
  await smtp?.stop();
  await hooks?.close();
  scenario = smtp = hooks = undefined;
});

/** 4 gearboxes × 20 samples (tests/helpers/fleetCsv.ts): an iron step and a dirt entry open incidents. */
const fleet = inventedFleet();

async function feed(s: Scenario, events: readonly unknown[] = fleet): Promise<void> {
  const producer = createResultProducer({ connection: s.client, prefix: PREFIX });
  expect((await producer.add(events)).every((o) => o.status === 'accepted')).toBe(true);
  await producer.close();
}

describe('mail server down for a while', () => {
  it('the mail arrives after the server is back, each message once', async () => {
    smtp = mailReceiver(await freePort());
    scenario = await startScenario({ smtpPort: smtp.port });
    const worker = await startWearshift('worker', { env: scenario.env() });
    await feed(scenario);
    const notify = scenario.queues.notify;
    await waitFor('a failed e-mail attempt waiting for its retry', async () => (await notify.getDelayedCount()) > 0, 60_000, 100);
    // The worker's log line may reach the pipe a moment after the job is moved to delayed.
    await waitFor('the worker logging the failed attempt', async () => /"queue":"notify".*ECONNREFUSED|"queue":"notify".*job failed; will retry/.test(worker.output()), 10_000, 100);
    // Down a while longer: several attempts fail.
    await new Promise((r) => setTimeout(r, 4000));
    const upAt = Date.now();
    await smtp.start();
    await settled(scenario, fleet.length, 120_000);

    const told = recordedNotifications(await allIncidents(scenario));
    expect(told.byChannel.email.length).toBeGreaterThan(0);
    expect(smtp.mails).toHaveLength(told.byChannel.email.length);
    expect(new Set(smtp.mails.map((m) => m.messageId)).size).toBe(smtp.mails.length);
    expect(smtp.mails.every((m) => m.at >= upAt)).toBe(true);
    const completed = await notify.getCompleted();
    expect(completed).toHaveLength(told.byChannel.email.length);
    expect(Math.max(...completed.map((j) => j.attemptsMade))).toBeGreaterThan(1);
    expect(await notify.getFailedCount()).toBe(0);
    console.info(`smtp outage: ${smtp.mails.length} e-mails delivered once after ${Math.max(...completed.map((j) => j.attemptsMade))} attempts at most`);
  });
});

describe('webhook receiver failing, slow, then asking to wait', () => {
  it('retries with backoff, honours Retry-After, gives up on a slow answer, and delivers each message once', async () => {
    const TIMEOUT_MS = 1000;
    const script = (_id: string, attempt: number): Answer =>
      [
        { status: 500 },
        // Longer than the sender's timeout: it hangs up, and must not count this as delivered.
        { status: 200, delayMs: TIMEOUT_MS + 1000 },
        { status: 503, headers: { 'retry-after': '6' } },
        // Slow, but within the timeout.
        { status: 200, delayMs: 300 },
      ][attempt - 1] ?? { status: 200 };
    hooks = await webhookReceiver(script);
    scenario = await startScenario({ webhookUrl: hooks.url, webhookTimeoutMs: TIMEOUT_MS });
    await startWearshift('worker', { env: scenario.env(hooks.secret) });
    // The first half holds the dirt entry of LS3 (its 10th sample); the rest arrives while the first
    // deliveries are being retried.
    await feed(scenario, fleet.slice(0, 40));
    await waitFor('the first delivery attempt', () => hooks!.attempts.length > 0, 60_000, 20);
    await feed(scenario, fleet.slice(40));
    await settled(scenario, fleet.length, 150_000);

    const told = recordedNotifications(await allIncidents(scenario));
    expect(told.byChannel.webhook.length).toBeGreaterThan(0);
    const delivered = hooks.delivered();
    expect([...delivered.keys()].map(effectKeyOf).sort()).toEqual([...told.byChannel.webhook].sort());
    expect([...delivered.values()].every((n) => n === 1)).toBe(true);

    const SLACK_MS = 1500;
    for (const id of delivered.keys()) {
      // Recorded when answered: the slow answer comes after the retry that followed the sender's timeout.
      const attempts = hooks.attempts.filter((a) => a.id === id).sort((a, b) => a.attempt - b.attempt);
      expect(attempts.map((a) => a.answer)).toEqual([500, 'sender-gone', 503, 200]);
      const gap = (i: number) => attempts[i]!.at - attempts[i - 1]!.at;
      // Full jitter: the n-th retry comes within base·2^(n−1) of the failure (AWS Architecture Blog,
      // "Exponential Backoff And Jitter", 2015; common practice).
      expect(gap(1)).toBeLessThan(DEFAULT_BACKOFF.baseMs + SLACK_MS);
      expect(gap(2)).toBeGreaterThanOrEqual(TIMEOUT_MS);
      expect(gap(2)).toBeLessThan(TIMEOUT_MS + 2 * DEFAULT_BACKOFF.baseMs + SLACK_MS);
      // Retry-After: 6 (above the 5 s floor a receiver's wait is held to) — not sooner, and not the backoff's window.
      expect(gap(3)).toBeGreaterThanOrEqual(6000 - 50);
      expect(gap(3)).toBeLessThan(6000 + SLACK_MS);
      // One message, the same bytes on every attempt (README: "so every retry sends the same bytes"): the
      // event describes the incident as it was, not the history as it is when the retry happens to run.
      const first = JSON.parse(attempts[0]!.body) as unknown;
      expect.soft(attempts.slice(1).map((a) => differingPaths(first, JSON.parse(a.body))), `body of ${id} across retries`).toEqual([[], [], []]);
    }
    expect(await scenario.queues.notify.getFailedCount()).toBe(0);
    console.info(`webhook trouble: ${delivered.size} messages, 4 attempts each, delivered once`);
  });
});

/** Dotted paths where two JSON values differ. */
function differingPaths(a: unknown, b: unknown, at = ''): string[] {
  if (typeof a !== 'object' || typeof b !== 'object' || a === null || b === null) return JSON.stringify(a) === JSON.stringify(b) ? [] : [at || '(root)'];
  const keys = new Set([...Object.keys(a), ...Object.keys(b)]);
  return [...keys].flatMap((k) => differingPaths((a as Record<string, unknown>)[k], (b as Record<string, unknown>)[k], at === '' ? k : `${at}.${k}`));
}
