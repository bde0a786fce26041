/**
 * Signed, expiring acknowledgement links for e-mail. The token carries the incident, the recipient it was
 * sent to and its expiry, with an HMAC-SHA256 over them; no server-side state is needed to check it.
 * Several secrets may be accepted at once so that a secret can be rotated without breaking links in flight.
 */
import { createHmac, timingSafeEqual } from 'node:crypto';

export interface AckLinkClaims {
  incidentId: string;
  /** The address the link was sent to: proposed as the acknowledger's name, and recorded. */
  recipient: string;
  expiresAt: Date;
}

export type AckLinkVerdict = { ok: true; claims: AckLinkClaims } | { ok: false; reason: 'expired' | 'tampered' | 'malformed' };

/** Shorter secrets are guessable offline from one captured link. */
export const ACK_SECRET_MIN_LENGTH = 16;

/**
 * The secrets an environment variable holds: several, comma-separated, during a rotation (links are signed with the
 * first, accepted with any); blanks around them and empty entries are dropped.
 */
export function ackLinkSecrets(value: string | undefined): string[] {
  return (value ?? '').split(',').map((x) => x.trim()).filter((x) => x !== '');
}

/**
 * Why the value of the secret's variable will not do, or undefined when it will: every secret of a rotation must be
 * long enough, and the first (the one links are signed with) must be there.
 */
export function ackSecretsProblem(value: string): string | undefined {
  const secrets = value.split(',').map((x) => x.trim());
  if (secrets[0] === '') return 'the first secret (the one links are signed with) is empty';
  const short = secrets.filter((x) => x !== '' && x.length < ACK_SECRET_MIN_LENGTH).length;
  return short === 0 ? undefined : `${short === 1 ? 'a secret' : `${short} secrets`} shorter than ${ACK_SECRET_MIN_LENGTH} characters (shorter ones can be guessed from one captured link)`;
}

/** Token version: a new format gets a new version so that old links are refused as malformed, not misread. */
const VERSION = 1;
const MAC_BYTES = 32;

export function signAckLink(claims: AckLinkClaims, secret: string): string {
  checkSecret(secret);
  const expiry = claims.expiresAt.getTime();
  if (!Number.isFinite(expiry)) throw new TypeError('expiresAt must be a valid date');
  const payload = Buffer.from(JSON.stringify({ v: VERSION, i: claims.incidentId, r: claims.recipient, e: Math.floor(expiry / 1000) })).toString('base64url');
  return `${payload}.${mac(payload, secret).toString('base64url')}`;
}

/**
 * Checks a token against every accepted secret (the current one first). The signature is checked before the
 * expiry, so "expired" is only ever said of a link we really issued.
 */
export function verifyAckLink(token: string, secrets: string | readonly string[], now: Date): AckLinkVerdict {
  const keys = typeof secrets === 'string' ? [secrets] : secrets;
  if (keys.length === 0) throw new TypeError('at least one acknowledgement-link secret is needed');
  keys.forEach(checkSecret);
  const parts = token.split('.');
  if (parts.length !== 2 || !isBase64Url(parts[0]) || !isBase64Url(parts[1])) return { ok: false, reason: 'malformed' };
  const [payload, signature] = parts as [string, string];
  const given = Buffer.from(signature, 'base64url');
  // Re-encoding must give the same text: base64 leaves spare bits in the last character, and a link that
  // still works with that character changed would not be the one we sent.
  if (given.length !== MAC_BYTES || given.toString('base64url') !== signature) return { ok: false, reason: 'malformed' };
  if (!keys.some((k) => timingSafeEqual(mac(payload, k), given))) return { ok: false, reason: 'tampered' };
  const claims = decodeClaims(payload);
  if (claims === undefined) return { ok: false, reason: 'malformed' };
  if (now.getTime() >= claims.expiresAt.getTime()) return { ok: false, reason: 'expired' };
  return { ok: true, claims };
}

/** The link to put in a message: `{baseUrl}/ack/{token}`. */
export function ackLinkUrl(baseUrl: string, token: string): string {
  return `${baseUrl.replace(/\/+$/, '')}/ack/${token}`;
}

function mac(payload: string, secret: string): Buffer {
  return createHmac('sha256', secret).update(`wearshift-ack.${payload}`).digest();
}

function checkSecret(secret: string): void {
  if (typeof secret !== 'string' || secret.length < ACK_SECRET_MIN_LENGTH) {
    throw new TypeError(`an acknowledgement-link secret must be at least ${ACK_SECRET_MIN_LENGTH} characters long`);
  }
}

function isBase64Url(s: string | undefined): s is string {
  return s !== undefined && s.length > 0 && /^[A-Za-z0-9_-]+$/.test(s);
}

function decodeClaims(payload: string): AckLinkClaims | undefined {
  let doc: unknown;
  try {
    doc = JSON.parse(Buffer.from(payload, 'base64url').toString('utf8'));
  } catch {
    return undefined;
  }
  if (typeof doc !== 'object' || doc === null) return undefined;
  const { v, i, r, e } = doc as Record<string, unknown>;
  if (v !== VERSION || typeof i !== 'string' || i === '' || typeof r !== 'string' || typeof e !== 'number' || !Number.isSafeInteger(e)) return undefined;
  return { incidentId: i, recipient: r, expiresAt: new Date(e * 1000) };
}
