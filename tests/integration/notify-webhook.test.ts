/**
 * Webhook delivery to a real HTTP receiver (node:http on a free port). The receiver checks every request with
 * the `standardwebhooks` npm package, the reference implementation of the Standard Webhooks specification,
 * exactly as an integrator's endpoint would.
 */
import { randomBytes } from 'node:crypto';
import { createServer, type IncomingHttpHeaders, type Server } from 'node:http';
import type { AddressInfo } from 'node:net';
import { Webhook, WebhookVerificationError } from 'standardwebhooks';
import { afterAll, beforeAll, beforeEach, describe, expect, it } from 'vitest';
import { DEFAULT_SOURCE_TEMPLATE, toCloudEvent } from '../../src/notify/cloudEvent.ts';
import { delayBeforeNextAttempt } from '../../src/notify/retryTiming.ts';
import { deliverWebhook } from '../../src/channels/webhook/webhookDelivery.ts';
import { notificationChannels } from '../../src/channels/openChannels.ts';
import { parseConfig } from '../../src/domain/configFile.ts';
import type { NotifyEffect } from '../../src/incidents/model.ts';
import { silentLogger } from '../../src/telemetry/logger.ts';
import { incidentMessage } from '../unit/notify-fixtures.ts';

interface Request {
  path: string;
  headers: IncomingHttpHeaders;
  body: string;
  verdict: 'verified' | string;
}

/** `holdBodyMs`: the status, the headers and `body` go out at once, and the response ends only after this wait. */
type Behaviour = (req: Request) => { status: number; headers?: Record<string, string>; body?: string; delayMs?: number; holdBodyMs?: number };

const currentSecret = `whsec_${randomBytes(32).toString('base64')}`;
const previousSecret = `whsec_${randomBytes(32).toString('base64')}`;
let receiverSecret = currentSecret;
let behaviour: Behaviour;
const requests: Request[] = [];
let server: Server;
let base: string;

beforeAll(async () => {
  server = createServer((req, res) => {
    const chunks: Buffer[] = [];
    req.on('data', (c: Buffer) => chunks.push(c));
    req.on('end', () => {
      const body = Buffer.concat(chunks).toString('utf8');
      let verdict: string;
      try {
        new Webhook(receiverSecret).verify(body, req.headers as Record<string, string>);
        verdict = 'verified';
      } catch (e) {
        verdict = e instanceof WebhookVerificationError ? e.message : String(e);
      }
      const request = { path: req.url ?? '', headers: req.headers, body, verdict };
      requests.push(request);
      const answer = behaviour(request);
      setTimeout(() => {
        if (res.destroyed) return;
        if (answer.holdBodyMs === undefined) return void res.writeHead(answer.status, answer.headers).end(answer.body ?? '');
        res.writeHead(answer.status, answer.headers);
        res.write(answer.body ?? '');
        const end = setTimeout(() => res.end(), answer.holdBodyMs);
        res.on('close', () => clearTimeout(end));
      }, answer.delayMs ?? 0);
    });
  });
  await new Promise<void>((resolve) => server.listen(0, '127.0.0.1', () => resolve()));
  base = `http://127.0.0.1:${(server.address() as AddressInfo).port}`;
});

afterAll(async () => {
  server.closeAllConnections();
  await new Promise<void>((resolve) => server.close(() => resolve()));
});

beforeEach(() => {
  requests.length = 0;
  receiverSecret = currentSecret;
  // An honest receiver: 204 when the signature verifies, 401 when it does not.
  behaviour = (r) => (r.verdict === 'verified' ? { status: 204 } : { status: 401, body: r.verdict });
});

const event = toCloudEvent(incidentMessage(), { time: '2026-03-01T08:05:00Z' });
const endpoint = (path = '/hook', secrets = [currentSecret]) => ({ url: `${base}${path}`, secrets, timeoutMs: 30_000 });

describe('webhook delivery', () => {
  it('delivers a CloudEvent the standardwebhooks verifier accepts', async () => {
    const result = await deliverWebhook(endpoint(), event, { now: new Date() });
    expect(result).toMatchObject({ outcome: 'delivered', status: 204, attempt: 1 });
    expect(requests).toHaveLength(1);
    const got = requests[0]!;
    expect(got.verdict).toBe('verified');
    expect(got.headers['webhook-id']).toBe(event.id);
    expect(got.headers['content-type']).toBe('application/cloudevents+json; charset=utf-8');
    const body = JSON.parse(got.body) as typeof event;
    expect(body).toEqual(event);
    expect(body.data.incident.id).toBe('INC-2026-0007');
  });

  it('sends credentials from the endpoint URL as basic authentication', async () => {
    const url = new URL(endpoint().url);
    url.username = 'plant-gw';
    url.password = 'p@ss:word';
    expect(await deliverWebhook({ ...endpoint(), url: url.href }, event, { now: new Date() })).toMatchObject({ outcome: 'delivered' });
    expect(requests[0]!.headers.authorization).toBe(`Basic ${Buffer.from('plant-gw:p@ss:word').toString('base64')}`);
  });

  it('signs with both secrets during a rotation, so receivers holding either one accept it', async () => {
    for (const held of [currentSecret, previousSecret]) {
      receiverSecret = held;
      const result = await deliverWebhook(endpoint('/hook', [currentSecret, previousSecret]), event, { now: new Date() });
      expect(result.outcome).toBe('delivered');
    }
    expect(requests.map((r) => r.verdict)).toEqual(['verified', 'verified']);
    expect(String(requests[0]!.headers['webhook-signature']).split(' ')).toHaveLength(2);
    receiverSecret = `whsec_${randomBytes(32).toString('base64')}`;
    const refused = await deliverWebhook(endpoint('/hook', [currentSecret, previousSecret]), event, { now: new Date() });
    expect(refused).toMatchObject({ outcome: 'give-up', status: 401 });
    expect(requests[2]!.verdict).toBe('No matching signature found');
  });

  it('keeps the webhook-id and the body across retries, with a fresh timestamp', async () => {
    const first = new Date();
    await deliverWebhook(endpoint(), event, { now: first, attempt: 1 });
    await deliverWebhook(endpoint(), event, { now: new Date(first.getTime() + 30_000), attempt: 2 });
    const [a, b] = requests;
    expect(a!.headers['webhook-id']).toBe(b!.headers['webhook-id']);
    expect(a!.body).toBe(b!.body);
    expect(Number(b!.headers['webhook-timestamp']) - Number(a!.headers['webhook-timestamp'])).toBe(30);
    expect(b!.verdict).toBe('verified');
  });

  it('is rejected by the verifier when the body is changed, the timestamp is stale or the key is wrong', async () => {
    await deliverWebhook(endpoint(), event, { now: new Date() });
    const genuine = requests[0]!;
    const headers = genuine.headers as Record<string, string>;
    const verifier = new Webhook(currentSecret);
    expect(() => verifier.verify(genuine.body, headers)).not.toThrow();
    expect(() => verifier.verify(genuine.body.replace('"caution"', '"watch"'), headers)).toThrow('No matching signature found');
    expect(() => new Webhook(previousSecret).verify(genuine.body, headers)).toThrow('No matching signature found');

    // Sent ten minutes late (the verifier tolerates five): the receiver refuses it as a possible replay.
    const stale = await deliverWebhook(endpoint(), event, { now: new Date(Date.now() - 10 * 60_000) });
    expect(requests[1]!.verdict).toBe('Message timestamp too old');
    expect(stale).toMatchObject({ outcome: 'give-up', status: 401, error: 'HTTP 401: Message timestamp too old' });
  });

  it('classifies the receiver’s answers: 500 retry, 410 disable, 400 give up, redirect not followed', async () => {
    behaviour = () => ({ status: 500, body: 'database unavailable' });
    expect(await deliverWebhook(endpoint(), event, { now: new Date(), attempt: 3 })).toMatchObject({ outcome: 'retry', status: 500, attempt: 3, error: 'HTTP 500: database unavailable' });
    behaviour = () => ({ status: 410 });
    expect(await deliverWebhook(endpoint(), event, { now: new Date() })).toMatchObject({ outcome: 'disable', status: 410, disable: true });
    behaviour = () => ({ status: 400, body: 'x'.repeat(5000) });
    const bad = await deliverWebhook(endpoint(), event, { now: new Date() });
    expect(bad).toMatchObject({ outcome: 'give-up', status: 400 });
    expect(bad.error!.length).toBeLessThan(320);
    behaviour = () => ({ status: 302, headers: { location: `${base}/elsewhere` } });
    expect(await deliverWebhook(endpoint(), event, { now: new Date() })).toMatchObject({ outcome: 'give-up', status: 302 });
    expect(requests.map((r) => r.path)).not.toContain('/elsewhere');
  });

  it('honours Retry-After on 429 (seconds) and 503 (HTTP date)', async () => {
    behaviour = () => ({ status: 429, headers: { 'retry-after': '7' } });
    const limited = await deliverWebhook(endpoint(), event, { now: new Date(), attempt: 2 });
    expect(limited).toMatchObject({ outcome: 'retry', status: 429, retryAfterMs: 7000 });
    expect(delayBeforeNextAttempt(limited, { baseMs: 1000, maxMs: 60_000 }, () => 0.5)).toBe(7000);

    const now = new Date('2026-03-01T08:05:00Z');
    behaviour = () => ({ status: 503, headers: { 'retry-after': 'Sun, 01 Mar 2026 08:07:30 GMT' } });
    // The signature is minutes old by the test's clock, so the receiver does not check it here.
    expect(await deliverWebhook(endpoint(), event, { now })).toMatchObject({ outcome: 'retry', status: 503, retryAfterMs: 150_000 });
  });

  it('gives up waiting for a slow receiver after the timeout and asks for a retry', async () => {
    // The receiver would answer only after two minutes: a delivery that waited for it could not end before then.
    behaviour = () => ({ status: 204, delayMs: 120_000 });
    const result = await deliverWebhook({ ...endpoint(), timeoutMs: 300 }, event, { now: new Date() });
    expect(result).toMatchObject({ outcome: 'retry', error: 'no response within 300 ms' });
    expect(result.status).toBeUndefined();
    expect(result.durationMs).toBeGreaterThanOrEqual(250);
    expect(result.durationMs).toBeLessThan(60_000);
  });

  it('decides on the status: a 2xx is delivered without waiting for its body; only an error’s start is read', async () => {
    // The receiver took the event and answers 200 at once, then takes minutes over the rest of its answer: waiting
    // for that body would run into the timeout and send the event again.
    behaviour = () => ({ status: 200, body: '{"accepted":', holdBodyMs: 600_000 });
    const delivered = await deliverWebhook({ ...endpoint(), timeoutMs: 60_000 }, event, { now: new Date() });
    expect(delivered).toMatchObject({ outcome: 'delivered', status: 200 });
    expect(delivered.durationMs).toBeLessThan(60_000);
    // An error's body is read only as far as the excerpt needs, not to its end.
    behaviour = () => ({ status: 503, body: `maintenance window ${'.'.repeat(400)}`, holdBodyMs: 600_000 });
    const refused = await deliverWebhook({ ...endpoint(), timeoutMs: 60_000 }, event, { now: new Date() });
    expect(refused).toMatchObject({ outcome: 'retry', status: 503 });
    expect(refused.error).toMatch(/^HTTP 503: maintenance window \.+$/);
    expect(refused.durationMs).toBeLessThan(60_000);
    // An error whose body stops coming is still judged by its status when the timeout ends the read.
    behaviour = () => ({ status: 500, body: 'database ', holdBodyMs: 600_000 });
    const cut = await deliverWebhook({ ...endpoint(), timeoutMs: 1_000 }, event, { now: new Date() });
    if (cut.status !== undefined) expect(cut).toMatchObject({ outcome: 'retry', status: 500, error: 'HTTP 500: database' });
    else expect(cut).toMatchObject({ outcome: 'retry', error: 'no response within 1000 ms' });
  });

  it('asks for a retry when nobody listens, and says why without the URL’s secrets', async () => {
    const closed = createServer();
    await new Promise<void>((resolve) => closed.listen(0, '127.0.0.1', () => resolve()));
    const port = (closed.address() as AddressInfo).port;
    await new Promise<void>((resolve) => closed.close(() => resolve()));
    const url = `http://user:pw@127.0.0.1:${port}/hook?token=s3cret`;
    const at = new Date();
    const result = await deliverWebhook({ url, secrets: [currentSecret] }, event, { now: at });
    expect(result).toMatchObject({ outcome: 'retry' });
    expect(result.error).toMatch(/ECONNREFUSED/);
    expect(result.attempt).toBe(1);
    // The reason becomes the notify job's failure reason and a log line: it names no credential of the URL.
    expect(JSON.stringify(result)).not.toMatch(/s3cret|pw@|user:/);
  });
});

describe('webhook delivery of a time-to-limit forecast', () => {
  it('carries the forecast and its caution in the CloudEvent data to a receiver that verifies the signature', async () => {
    const { evaluateComponent } = await import('../../src/analysis/evaluate.ts');
    const { forecastComponent } = await import('../../src/analysis/forecast/forecastComponent.ts');
    const { parseConfig } = await import('../../src/domain/configFile.ts');
    const { resolveSettings } = await import('../../src/domain/settings.ts');
    const { FORECAST_CAUTION } = await import('../../src/domain/caution.ts');
    const { simulatedSamples, SIM_CONFIG } = await import('../helpers/wearFleet.ts');
    const samples = simulatedSamples({ samples: 33, intervalHours: 120 }, 13);
    const settings = resolveSettings(parseConfig(`${SIM_CONFIG}    chargeHours: 1000\n    limits: { Fe: { caution: 40, alarm: 60 } }\n`), samples[0]!);
    const f = forecastComponent(evaluateComponent(samples, settings).state, settings, undefined, { measurands: ['Fe'] });
    const items = f.measurands[0]!.limits.map((l) => ({ measurand: l.measurand, severity: l.severity, source: l.source, side: l.side, level: l.level, outcome: l.outcome, text: l.text, ...(l.central && { central: l.central }) }));
    const withForecast = toCloudEvent(incidentMessage({ forecast: { caution: f.caution, items } }), { time: '2026-03-01T08:05:00Z' });
    const result = await deliverWebhook(endpoint(), withForecast, { now: new Date() });
    expect(result).toMatchObject({ outcome: 'delivered', status: 204 });
    const body = JSON.parse(requests[0]!.body) as { data: { forecast: { caution: string; items: { text: string; outcome: string }[] } } };
    expect(requests[0]!.verdict).toBe('verified');
    expect(body.data.forecast.caution).toContain(FORECAST_CAUTION);
    expect(body.data.forecast.items.map((i) => i.text)).toEqual(items.map((i) => i.text));
    expect(body.data.forecast.items.some((i) => i.outcome === 'crossing')).toBe(true);
  });
});

describe('the CloudEvents source a webhook is configured with', () => {
  it('reaches the receiver in the signed event; a webhook that names none keeps the default source, byte for byte', async () => {
    // Two sites' receivers routing by source: one webhook sets its own, the other leaves the default.
    const config = parseConfig(`
channels:
  webhooks:
    - { name: north-site, url: '${base}/north', secrets: ['${currentSecret}'], source: 'urn:plant-north:{group}:{unit}/{component}' }
    - { name: south-site, url: '${base}/south', secrets: ['${currentSecret}'] }
`);
    expect(config.channels.webhooks.map((w) => w.source)).toEqual(['urn:plant-north:{group}:{unit}/{component}', DEFAULT_SOURCE_TEMPLATE]);
    const channels = notificationChannels(config.channels, { logger: silentLogger(), env: {} });
    const message = incidentMessage({}, { unit: 'Line 2/P3' });
    const effect = (target: string) =>
      ({ kind: 'notify', channel: 'webhook', target, incidentId: message.incident.id, tier: 0, type: 'wearshift.incident.opened', at: '2026-03-01T08:05:00Z' }) as NotifyEffect;
    try {
      await expect(channels.deliver({ effect: effect('north-site'), message, attempt: 1 })).resolves.toBe('webhook north-site: 204');
      await expect(channels.deliver({ effect: effect('south-site'), message, attempt: 1 })).resolves.toBe('webhook south-site: 204');
    } finally {
      await channels.close();
    }
    expect(requests.map((r) => [r.path, r.verdict])).toEqual([
      ['/north', 'verified'],
      ['/south', 'verified'],
    ]);
    const [north, south] = requests.map((r) => JSON.parse(r.body) as typeof event);
    // The names are percent-encoded, so that a "/" in a unit stays inside its part of the source.
    expect(north!.source).toBe('urn:plant-north:pump-gearboxes:Line%202%2FP3/gearbox');
    expect(north!.id).toBe(message.idempotencyKey);
    expect(requests[0]!.headers['webhook-id']).toBe(message.idempotencyKey);
    // Without the option the body is exactly what it was before the option existed.
    expect(south!.source).toBe('/wearshift/Line%202%2FP3/gearbox');
    expect(requests[1]!.body).toBe(JSON.stringify(toCloudEvent(message, { time: '2026-03-01T08:05:00Z' })));
  });
});
