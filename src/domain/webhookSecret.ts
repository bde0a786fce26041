/**
 * What a Standard Webhooks signing secret must look like: `whsec_` and the base64 of a key of 24 to 64 bytes. Checked
 * where the configuration is read (a literal secret) and where the worker starts (a secret from the environment), so
 * that a secret that cannot sign is found before the first alarm, not by it.
 */

/** The Standard Webhooks specification asks for keys of 24 to 64 bytes. */
export const WEBHOOK_KEY_BYTES = { min: 24, max: 64 } as const;
export const WEBHOOK_SECRET_PREFIX = 'whsec_';

/** Why `secret` cannot sign a webhook; undefined when it can. */
export function webhookSecretProblem(secret: string): string | undefined {
  if (!secret.startsWith(WEBHOOK_SECRET_PREFIX)) return `a webhook secret must look like "${WEBHOOK_SECRET_PREFIX}<base64>"`;
  const encoded = secret.slice(WEBHOOK_SECRET_PREFIX.length);
  if (!/^[A-Za-z0-9+/]+={0,2}$/.test(encoded) || encoded.length % 4 !== 0) return `a webhook secret must be base64 after "${WEBHOOK_SECRET_PREFIX}"`;
  const bytes = Buffer.from(encoded, 'base64').length;
  if (bytes < WEBHOOK_KEY_BYTES.min || bytes > WEBHOOK_KEY_BYTES.max) return `a webhook secret must hold ${WEBHOOK_KEY_BYTES.min} to ${WEBHOOK_KEY_BYTES.max} bytes, this one holds ${bytes}`;
  return undefined;
}
