/**
 * The public entry point integrators import (`import … from 'wearshift'`, package.json `exports`): the producer,
 * the result event's schema, and the webhook verification helper, checked against the Standard Webhooks reference
 * library (npm standardwebhooks) as the signer.
 */
import { randomBytes } from 'node:crypto';
import { Webhook } from 'standardwebhooks';
import { describe, expect, it } from 'vitest';
import * as wearshift from 'wearshift';

const secret = () => `whsec_${randomBytes(32).toString('base64')}`;

describe("the package's public entry point", () => {
  it('offers the producer, the event schema and the webhook check, and nothing of the internals', () => {
    expect(Object.keys(wearshift).sort()).toEqual(['ADVISORY_CAUTION', 'DEFAULT_WEBHOOK_TOLERANCE_SECONDS', 'ResultEventSchema', 'createResultProducer', 'parseResultEvent', 'verifyWebhook']);
    const parsed = wearshift.parseResultEvent({ sampleId: 'LAB-1', unit: 'PS2-P3', component: 'gearbox', sampledAt: '2026-03-01T08:00:00Z', readings: { Fe: 12 } });
    expect(parsed.ok).toBe(true);
    const bad = wearshift.parseResultEvent({ sampleId: 'LAB-2', unit: 'PS2-P3', component: 'gearbox', sampledAt: 'yesterday', readings: { Fe: 12 } });
    expect(bad.ok ? [] : bad.issues.map((i) => i.path)).toEqual(['sampledAt']);
  });

  it('verifies a delivery the reference library signed, during a rotation too; refuses a changed body, a wrong key and an old timestamp', () => {
    const [current, previous] = [secret(), secret()];
    const body = JSON.stringify({ type: 'incident.opened', data: { unit: 'PS2-P3' } });
    const now = new Date('2026-03-01T08:00:00Z');
    const headers = { 'webhook-id': 'msg-1', 'webhook-timestamp': String(now.getTime() / 1000), 'webhook-signature': new Webhook(previous).sign('msg-1', now, body) };
    expect(wearshift.verifyWebhook(headers, body, [current, previous], now)).toEqual({ ok: true });
    expect(wearshift.verifyWebhook(headers, `${body} `, [current, previous], now)).toEqual({ ok: false, reason: 'bad-signature' });
    expect(wearshift.verifyWebhook(headers, body, [current], now)).toEqual({ ok: false, reason: 'bad-signature' });
    expect(wearshift.verifyWebhook(headers, body, [previous], new Date(now.getTime() + 301_000))).toEqual({ ok: false, reason: 'stale-timestamp' });
    expect(wearshift.verifyWebhook({ 'webhook-id': 'msg-1' }, body, [previous], now)).toEqual({ ok: false, reason: 'missing-header' });
  });
});
