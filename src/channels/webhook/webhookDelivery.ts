/**
 * One webhook delivery attempt: the CloudEvent as the body, Standard Webhooks headers, a timeout, and a
 * verdict for the queue (delivered, retry, give up, or disable the endpoint). Retrying is the queue's job;
 * `webhook-id` stays the same on every attempt so that the receiver can drop repeats.
 */
import type { IncidentCloudEvent } from '../../notify/cloudEvent.ts';
import { parseRetryAfter } from '../../notify/retryTiming.ts';
import { oneLine } from '../../domain/safeText.ts';
import { signWebhook } from './webhookSignature.ts';

export interface WebhookEndpoint {
  url: string;
  /** `whsec_<base64>` secrets; during a rotation both the new and the old one. */
  secrets: string[];
  /** How long to wait for the response. Default 10 s. */
  timeoutMs?: number;
}

export const DEFAULT_WEBHOOK_TIMEOUT_MS = 10_000;

export interface DeliverOptions {
  /** The attempt's time: the signed `webhook-timestamp` and the base of a Retry-After date. */
  now: Date;
  /** Which attempt this is, counted from 1. Default 1. */
  attempt?: number;
  /** Default: the global fetch. */
  fetch?: typeof fetch;
  /**
   * Ends the attempt when it aborts (the channel closing, webhookChannel.ts): the request is aborted and its
   * connection closed at once, and the attempt is retryable as at the timeout, so that a stopping worker is not held
   * by a receiver that does not answer. Already aborted: no request is made.
   */
  signal?: AbortSignal;
}

export type DeliveryOutcome = 'delivered' | 'retry' | 'give-up' | 'disable';

export interface DeliveryResult {
  outcome: DeliveryOutcome;
  /** HTTP status; absent when no response came (timeout, refused connection). */
  status?: number;
  attempt: number;
  durationMs: number;
  /** The receiver's Retry-After (429, 503), to wait instead of the backoff. */
  retryAfterMs?: number;
  /** True on 410 Gone: the receiver asks not to be called again. */
  disable?: boolean;
  error?: string;
  /**
   * No connection was made (refused, unknown host, no route): the receiver cannot have the event. Absent when it may
   * have it (no answer within the timeout, a connection broken after the request went out) or when it answered.
   */
  notConnected?: boolean;
}

const CLOSED = 'the webhook channel closed (the worker is stopping)';

/** Enough of an error response to tell what went wrong, not enough to bloat the delivery log. */
const EXCERPT_BYTES = 300;

export async function deliverWebhook(endpoint: WebhookEndpoint, event: IncidentCloudEvent, options: DeliverOptions): Promise<DeliveryResult> {
  const attempt = options.attempt ?? 1;
  const timeoutMs = endpoint.timeoutMs ?? DEFAULT_WEBHOOK_TIMEOUT_MS;
  const url = new URL(endpoint.url);
  if (url.protocol !== 'https:' && url.protocol !== 'http:') throw new TypeError(`webhook url must use http or https, got "${url.protocol}"`);
  const body = JSON.stringify(event);
  // fetch refuses URLs with user info; receivers that put basic-auth credentials there get them as a header.
  const basicAuth: Record<string, string> =
    url.username || url.password ? { authorization: `Basic ${Buffer.from(`${decodeURIComponent(url.username)}:${decodeURIComponent(url.password)}`).toString('base64')}` } : {};
  url.username = '';
  url.password = '';
  const headers: Record<string, string> = {
    ...signWebhook(event.id, options.now, body, endpoint.secrets),
    ...basicAuth,
    // CloudEvents HTTP binding, structured mode: the whole event is the body.
    'content-type': 'application/cloudevents+json; charset=utf-8',
    'user-agent': 'wearshift-webhook',
  };
  const started = performance.now();
  const elapsed = () => Math.round(performance.now() - started);
  if (aborted(options.signal)) return { outcome: 'retry', attempt, durationMs: 0, error: `not sent: ${CLOSED}`, notConnected: true };
  // The timeout also bounds the reading of an error's body; the closing ends the attempt wherever it is.
  const { signal, release } = attemptSignal(timeoutMs, options.signal);
  try {
    let response: Response;
    try {
      // Redirects are not followed: the signature was made for this receiver, and a redirect may lead anywhere.
      response = await (options.fetch ?? fetch)(url, { method: 'POST', headers, body, redirect: 'manual', signal });
    } catch (e) {
      // Ended by the timeout or by the closing: the request may have reached the receiver either way.
      const timedOut = isTimeout(e);
      const closed = !timedOut && aborted(options.signal);
      const error = timedOut ? `no response within ${timeoutMs} ms` : closed ? `no response: ${CLOSED}; request aborted` : `no response: ${networkReason(e)}`;
      return { outcome: 'retry', attempt, durationMs: elapsed(), error, ...(!timedOut && !closed && NOT_CONNECTED.has(networkCode(e) ?? '') && { notConnected: true }) };
    }
    const status = response.status;
    // The status decides. A 2xx is delivered as soon as it arrives: its body is not waited for (a receiver that took
    // the event and then dawdles over its answer must not have it sent again).
    if (status >= 200 && status < 300) {
      void response.body?.cancel().catch(() => undefined);
      return { outcome: 'delivered', status, attempt, durationMs: elapsed() };
    }
    // Only an error's body is read, and only its start, within what is left of the timeout.
    const excerpt = await responseExcerpt(response);
    const durationMs = elapsed();
    const error = `HTTP ${status}${excerpt ? `: ${excerpt}` : ''}`;
    if (status === 410) return { outcome: 'disable', status, attempt, durationMs, disable: true, error };
    if (status === 429 || status === 503) {
      const retryAfterMs = parseRetryAfter(response.headers.get('retry-after'), options.now);
      return { outcome: 'retry', status, attempt, durationMs, error, ...(retryAfterMs !== undefined && { retryAfterMs }) };
    }
    // 408 is the receiver's own timeout: as retryable as ours.
    if (status >= 500 || status === 408) return { outcome: 'retry', status, attempt, durationMs, error };
    if (status >= 300 && status < 400) {
      return { outcome: 'give-up', status, attempt, durationMs, error: `HTTP ${status}: redirect to ${oneLine(response.headers.get('location') ?? '(no location)')} not followed` };
    }
    return { outcome: 'give-up', status, attempt, durationMs, error };
  } finally {
    release();
  }
}

/** The start of an error response's body; what arrived before the timeout or a broken connection, if it ends early. */
async function responseExcerpt(response: Response): Promise<string> {
  if (response.body === null) return '';
  const reader = response.body.getReader();
  const chunks: Uint8Array[] = [];
  let size = 0;
  try {
    while (size < EXCERPT_BYTES) {
      const { done, value } = await reader.read();
      if (done) break;
      chunks.push(value);
      size += value.byteLength;
    }
  } catch {
    // The status has decided already; the excerpt only explains it.
  }
  await reader.cancel().catch(() => undefined);
  const text = Buffer.concat(chunks).subarray(0, EXCERPT_BYTES).toString('utf8');
  return oneLine(text.replace(/\uFFFD+$/, ''));
}

/**
 * The attempt's signal: aborted at the timeout (a TimeoutError) or when `closing` aborts. `release` unhooks it from
 * `closing`, which lives as long as the channel, so that finished attempts are not kept by it.
 */
function attemptSignal(timeoutMs: number, closing: AbortSignal | undefined): { signal: AbortSignal; release: () => void } {
  const timeout = AbortSignal.timeout(timeoutMs);
  if (closing === undefined) return { signal: timeout, release: () => {} };
  const either = new AbortController();
  const onTimeout = () => either.abort(timeout.reason);
  const onClose = () => either.abort(closing.reason);
  timeout.addEventListener('abort', onTimeout, { once: true });
  closing.addEventListener('abort', onClose, { once: true });
  return {
    signal: either.signal,
    release: () => {
      timeout.removeEventListener('abort', onTimeout);
      closing.removeEventListener('abort', onClose);
    },
  };
}

/** Read through a call: the signal is aborted by others while the request waits. */
function aborted(signal: AbortSignal | undefined): boolean {
  return signal?.aborted === true;
}

function isTimeout(e: unknown): boolean {
  return e instanceof Error && (e.name === 'TimeoutError' || (e.cause instanceof Error && e.cause.name === 'TimeoutError'));
}

/** Errors of a connection that was never made: nothing of the request reached the receiver. */
const NOT_CONNECTED = new Set(['ECONNREFUSED', 'ENOTFOUND', 'EAI_AGAIN', 'EHOSTUNREACH', 'ENETUNREACH', 'EADDRNOTAVAIL']);

function networkCode(e: unknown): string | undefined {
  const cause = e instanceof Error ? (e.cause as (Error & { code?: string }) | undefined) : undefined;
  return cause instanceof Error && typeof cause.code === 'string' ? cause.code : undefined;
}

/** fetch says only "fetch failed"; the reason (ECONNREFUSED, a DNS failure ...) is in its cause. */
function networkReason(e: unknown): string {
  if (!(e instanceof Error)) return String(e);
  const cause = e.cause as (Error & { code?: string }) | undefined;
  if (cause instanceof Error) return oneLine(`${cause.code ? `${cause.code} ` : ''}${cause.message}`);
  return oneLine(e.message);
}
