/**
 * Standard Webhooks signatures: `webhook-signature: v1,<base64 HMAC-SHA256 of "{id}.{timestamp}.{body}">`,
 * keyed by the bytes of a `whsec_<base64>` secret. With several secrets (rotation) every signature is sent,
 * space-separated, and a receiver accepts the message when any one matches a key it holds.
 */
import { createHmac, timingSafeEqual } from 'node:crypto';
import { WEBHOOK_SECRET_PREFIX, webhookSecretProblem } from '../../domain/webhookSecret.ts';

/** The key bytes of a `whsec_<base64>` secret (24 to 64 of them); throws a clear error for anything else. */
export function webhookKey(secret: string): Buffer {
  const problem = webhookSecretProblem(secret);
  if (problem !== undefined) throw new TypeError(problem);
  return Buffer.from(secret.slice(WEBHOOK_SECRET_PREFIX.length), 'base64');
}

export interface WebhookHeaders {
  'webhook-id': string;
  'webhook-timestamp': string;
  'webhook-signature': string;
}

/** The three Standard Webhooks headers for one attempt; `timestamp` is the attempt's time. */
export function signWebhook(id: string, timestamp: Date, body: string, secrets: readonly string[]): WebhookHeaders {
  if (secrets.length === 0) throw new TypeError('a webhook endpoint needs at least one secret');
  if (!/^[\x21-\x7e]{1,255}$/.test(id)) throw new TypeError(`webhook-id "${id}" must be 1 to 255 visible ASCII characters (it is a header value)`);
  const seconds = String(Math.floor(timestamp.getTime() / 1000));
  const signed = `${id}.${seconds}.${body}`;
  const signatures = secrets.map((s) => `v1,${createHmac('sha256', webhookKey(s)).update(signed).digest('base64')}`);
  return { 'webhook-id': id, 'webhook-timestamp': seconds, 'webhook-signature': signatures.join(' ') };
}

/** Why a delivery was refused by `verifyWebhook`. */
export type WebhookRefusal = 'missing-header' | 'stale-timestamp' | 'bad-signature';

/** Default tolerance between a delivery's timestamp and the receiver's clock: five minutes, as Standard Webhooks advises. */
export const DEFAULT_WEBHOOK_TOLERANCE_SECONDS = 300;

/**
 * For integrators: checks a delivery's Standard Webhooks headers against the raw body and the secrets the receiver
 * holds (current first during a rotation). `now` is the receiver's clock; a timestamp further than
 * `toleranceSeconds` from it is refused, so a captured delivery cannot be replayed later. Compares in constant time.
 */
export function verifyWebhook(
  headers: Readonly<Record<string, string | string[] | undefined>>,
  body: string,
  secrets: readonly string[],
  now: Date,
  toleranceSeconds = DEFAULT_WEBHOOK_TOLERANCE_SECONDS,
): { ok: true } | { ok: false; reason: WebhookRefusal } {
  const one = (name: string) => {
    const v = headers[name] ?? headers[name.toLowerCase()];
    return Array.isArray(v) ? v[0] : v;
  };
  const id = one('webhook-id');
  const stamp = one('webhook-timestamp');
  const signature = one('webhook-signature');
  if (id === undefined || stamp === undefined || signature === undefined) return { ok: false, reason: 'missing-header' };
  const seconds = Number(stamp);
  if (!/^\d{1,12}$/.test(stamp) || Math.abs(now.getTime() / 1000 - seconds) > toleranceSeconds) return { ok: false, reason: 'stale-timestamp' };
  const signed = `${id}.${stamp}.${body}`;
  const offered = signature.split(' ').filter((s) => s.startsWith('v1,')).map((s) => Buffer.from(s.slice(3), 'base64'));
  for (const secret of secrets) {
    const expected = createHmac('sha256', webhookKey(secret)).update(signed).digest();
    if (offered.some((o) => o.length === expected.length && timingSafeEqual(o, expected))) return { ok: true };
  }
  return { ok: false, reason: 'bad-signature' };
}
