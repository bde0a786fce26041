/** When to try a failed delivery again: the receiver's Retry-After when it gave one, else backoff with jitter. */

export interface BackoffPolicy {
  /** Upper bound of the first delay. */
  baseMs: number;
  /** No delay exceeds this. */
  maxMs: number;
}

/** 5 s, doubling, never more than one hour between attempts. */
export const DEFAULT_BACKOFF: BackoffPolicy = { baseMs: 5_000, maxMs: 3_600_000 };

/**
 * The shortest wait a receiver's Retry-After can ask for. A proxy that answers 503 with `Retry-After: 0` (or a date
 * already past) would otherwise have every attempt of a message made within seconds, and an alarm lost to a
 * passing outage.
 */
export const MIN_RETRY_AFTER_MS = 5_000;

/**
 * Exponential backoff with "full jitter": a delay drawn uniformly from [0, min(maxMs, baseMs·2^(attempt−1))).
 * Spreading retries over the whole window keeps many senders from hitting a recovering receiver in step.
 * `attempt` counts the attempts made so far (1 after the first failure); `random` returns values in [0, 1).
 */
export function nextRetryDelay(attempt: number, policy: BackoffPolicy, random: () => number): number {
  if (!Number.isInteger(attempt) || attempt < 1) throw new RangeError(`attempt must be a whole number from 1, got ${attempt}`);
  if (!(policy.baseMs > 0) || !(policy.maxMs >= policy.baseMs)) throw new RangeError(`backoff needs 0 < baseMs <= maxMs, got ${policy.baseMs} and ${policy.maxMs}`);
  const r = random();
  if (!(r >= 0 && r < 1)) throw new RangeError(`random() must return a number in [0, 1), got ${r}`);
  const window = Math.min(policy.maxMs, policy.baseMs * 2 ** (attempt - 1));
  return Math.floor(r * window);
}

/**
 * A Retry-After header value in milliseconds from `now` (RFC 9110 §10.2.3: delay-seconds or an HTTP-date);
 * undefined when absent or unreadable. A date in the past means "now": 0.
 */
export function parseRetryAfter(value: string | null | undefined, now: Date): number | undefined {
  if (value === null || value === undefined) return undefined;
  const v = value.trim();
  if (/^\d+$/.test(v)) return Number(v) * 1000;
  // Digits alone were handled above: Date.parse would read "120" as a year.
  if (!/[A-Za-z]/.test(v)) return undefined;
  const at = Date.parse(v);
  return Number.isNaN(at) ? undefined : Math.max(0, at - now.getTime());
}

/**
 * The wait before the next attempt after a failed one: the receiver's Retry-After wins over the backoff, held
 * between `MIN_RETRY_AFTER_MS` (5 s) and the backoff's `maxMs` (one hour by default), so that a receiver can
 * neither make the attempts run out at once nor hold an alarm back for longer than the backoff ever would.
 */
export function delayBeforeNextAttempt(result: { attempt: number; retryAfterMs?: number }, policy: BackoffPolicy, random: () => number): number {
  if (result.retryAfterMs === undefined || Number.isNaN(result.retryAfterMs)) return nextRetryDelay(result.attempt, policy, random);
  return Math.min(policy.maxMs, Math.max(Math.min(MIN_RETRY_AFTER_MS, policy.maxMs), result.retryAfterMs));
}
