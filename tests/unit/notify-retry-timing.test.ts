import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { DEFAULT_BACKOFF, delayBeforeNextAttempt, MIN_RETRY_AFTER_MS, nextRetryDelay, parseRetryAfter } from '../../src/notify/retryTiming.ts';

const policy = { baseMs: 1000, maxMs: 60_000 };

/** A seeded generator (Park–Miller minimal standard), so that the statistical check is repeatable. */
function seeded(seed: number): () => number {
  let s = seed;
  return () => {
    s = (s * 48271) % 2147483647;
    return (s - 1) / 2147483646;
  };
}

describe('retry backoff with full jitter', () => {
  it('draws from [0, min(maxMs, baseMs·2^(attempt−1)))', () => {
    fc.assert(
      fc.property(fc.integer({ min: 1, max: 60 }), fc.double({ min: 0, max: 1, maxExcluded: true, noNaN: true }), (attempt, r) => {
        const d = nextRetryDelay(attempt, policy, () => r);
        expect(d).toBeGreaterThanOrEqual(0);
        expect(d).toBeLessThan(Math.min(policy.maxMs, policy.baseMs * 2 ** (attempt - 1)));
        expect(Number.isInteger(d)).toBe(true);
      }),
    );
    expect(nextRetryDelay(1, policy, () => 0)).toBe(0);
    expect(nextRetryDelay(1, policy, () => 0.5)).toBe(500);
    expect(nextRetryDelay(4, policy, () => 0.5)).toBe(4000);
    expect(nextRetryDelay(30, policy, () => 0.5)).toBe(30_000);
  });

  it('is uniform over the window: mean half the window (the "full jitter" scheme of exponential backoff)', () => {
    // Full jitter, as described in M. Brooker, "Exponential Backoff And Jitter", AWS Architecture Blog (2015):
    // sleep = random_between(0, min(cap, base · 2^attempt)). For a uniform draw the mean is window/2 and the
    // standard deviation window/√12; 4000 draws put the sample mean within 2 % of window/2 at about 4 sigma.
    const random = seeded(12345);
    const n = 4000;
    const window = 8000;
    let sum = 0;
    for (let i = 0; i < n; i++) sum += nextRetryDelay(4, policy, random);
    expect(Math.abs(sum / n - window / 2)).toBeLessThan(0.02 * window);
  });

  it('rejects nonsense', () => {
    expect(() => nextRetryDelay(0, policy, Math.random)).toThrow(/attempt/);
    expect(() => nextRetryDelay(1.5, policy, Math.random)).toThrow(/attempt/);
    expect(() => nextRetryDelay(1, { baseMs: 10, maxMs: 5 }, Math.random)).toThrow(/baseMs <= maxMs/);
    expect(() => nextRetryDelay(1, policy, () => 1)).toThrow(/\[0, 1\)/);
  });

  it('lets the receiver’s Retry-After win over the backoff', () => {
    expect(delayBeforeNextAttempt({ attempt: 3, retryAfterMs: 45_000 }, policy, () => 0.5)).toBe(45_000);
    expect(delayBeforeNextAttempt({ attempt: 3 }, policy, () => 0.5)).toBe(2000);
  });

  it('holds a Retry-After between 5 s and the backoff’s longest wait', () => {
    const now = new Date('2026-03-01T08:00:00Z');
    // A year asked for waits an hour (the default backoff's longest wait), not a year.
    const year = parseRetryAfter('31536000', now)!;
    expect(delayBeforeNextAttempt({ attempt: 1, retryAfterMs: year }, DEFAULT_BACKOFF, () => 0.5)).toBe(DEFAULT_BACKOFF.maxMs);
    // "At once", or a date already past, waits 5 s: twenty attempts cannot be spent within seconds.
    for (const header of ['0', 'Sun, 01 Mar 2026 07:00:00 GMT']) {
      expect(delayBeforeNextAttempt({ attempt: 1, retryAfterMs: parseRetryAfter(header, now)! }, DEFAULT_BACKOFF, () => 0.5), header).toBe(MIN_RETRY_AFTER_MS);
    }
    expect(MIN_RETRY_AFTER_MS).toBe(5000);
    fc.assert(
      fc.property(fc.integer({ min: 0, max: 10 * 365 * 86_400_000 }), fc.integer({ min: 1, max: 20 }), (asked, attempt) => {
        const d = delayBeforeNextAttempt({ attempt, retryAfterMs: asked }, DEFAULT_BACKOFF, () => 0.5);
        expect(d).toBeGreaterThanOrEqual(MIN_RETRY_AFTER_MS);
        expect(d).toBeLessThanOrEqual(DEFAULT_BACKOFF.maxMs);
        // Within the bounds, the receiver's wait is kept as asked.
        if (asked >= MIN_RETRY_AFTER_MS && asked <= DEFAULT_BACKOFF.maxMs) expect(d).toBe(asked);
      }),
    );
  });
});

describe('Retry-After (RFC 9110 §10.2.3)', () => {
  const now = new Date('1999-12-31T23:57:59Z');

  it('reads delay-seconds', () => {
    // RFC 9110 §10.2.3 example: "Retry-After: 120"
    expect(parseRetryAfter('120', now)).toBe(120_000);
    expect(parseRetryAfter(' 0 ', now)).toBe(0);
  });

  it('reads an HTTP-date relative to now', () => {
    // RFC 9110 §10.2.3 example: "Retry-After: Fri, 31 Dec 1999 23:59:59 GMT"
    expect(parseRetryAfter('Fri, 31 Dec 1999 23:59:59 GMT', now)).toBe(120_000);
    // RFC 9110 §5.6.7: recipients also accept the obsolete RFC 850 form.
    expect(parseRetryAfter('Friday, 31-Dec-99 23:59:59 GMT', now)).toBe(120_000);
    expect(parseRetryAfter('Fri, 31 Dec 1999 23:00:00 GMT', now)).toBe(0);
  });

  it('ignores what it cannot read', () => {
    for (const v of [null, undefined, '', '-5', '1.5', 'soon', '2026-03-01']) {
      expect(parseRetryAfter(v, now), String(v)).toBeUndefined();
    }
    // Digits are always seconds, never a year.
    expect(parseRetryAfter('2000', now)).toBe(2_000_000);
  });
});
