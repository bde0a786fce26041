import { randomBytes } from 'node:crypto';
import { Webhook } from 'standardwebhooks';
import { describe, expect, it } from 'vitest';
import { toCloudEvent } from '../../src/notify/cloudEvent.ts';
import { signWebhook, webhookKey } from '../../src/channels/webhook/webhookSignature.ts';
import { incidentMessage } from './notify-fixtures.ts';

const secret = () => `whsec_${randomBytes(32).toString('base64')}`;

describe('Standard Webhooks signature', () => {
  it('reproduces the worked example of the Standard Webhooks reference implementation', () => {
    // From memory: the signing example used by the Standard Webhooks reference libraries (and Svix's docs);
    // the `standardwebhooks` npm package computes the same value below, so the recollection is checked too.
    const example = { secret: 'whsec_MfKQ9r8GKYqrTwjUPD8ILPZIo2LaLaSw', id: 'msg_p5jXN8AQM9LWM0D4loKWxJek', timestamp: new Date(1614265330 * 1000), body: '{"test": 2432232314}' };
    const headers = signWebhook(example.id, example.timestamp, example.body, [example.secret]);
    expect(headers['webhook-signature']).toBe('v1,g0hM9SsE+OTPJTGt/tmIKtSyZlE3uFJELVlNIOLJ1OE=');
    expect(headers['webhook-signature']).toBe(new Webhook(example.secret).sign(example.id, example.timestamp, example.body));
    expect(headers['webhook-timestamp']).toBe('1614265330');
  });

  it('is accepted by the standardwebhooks verifier for either secret during a rotation', () => {
    const [current, previous] = [secret(), secret()];
    const body = JSON.stringify(toCloudEvent(incidentMessage(), { time: '2026-03-01T08:05:00Z' }));
    const headers = signWebhook('INC-2026-0007:opened:1', new Date(), body, [current, previous]);
    expect(headers['webhook-signature'].split(' ')).toHaveLength(2);
    // Reference implementation: npm `standardwebhooks` (Standard Webhooks specification).
    expect(new Webhook(current).verify(body, { ...headers })).toMatchObject({ id: 'INC-2026-0007:opened:1' });
    expect(new Webhook(previous).verify(body, { ...headers })).toMatchObject({ id: 'INC-2026-0007:opened:1' });
    expect(() => new Webhook(secret()).verify(body, { ...headers })).toThrow(/No matching signature/);
  });

  it('refuses secrets that are not whsec_ base64 of 24 to 64 bytes', () => {
    expect(() => webhookKey('plain-text-secret')).toThrow(/whsec_/);
    expect(() => webhookKey('whsec_not*base64')).toThrow(/base64/);
    expect(() => webhookKey(`whsec_${randomBytes(16).toString('base64')}`)).toThrow(/24 to 64 bytes, this one holds 16/);
    expect(webhookKey(`whsec_${Buffer.alloc(24, 1).toString('base64')}`)).toHaveLength(24);
    expect(() => signWebhook('id', new Date(), '{}', [])).toThrow(/at least one secret/);
    expect(() => signWebhook('two words', new Date(), '{}', [secret()])).toThrow(/visible ASCII/);
  });
});
