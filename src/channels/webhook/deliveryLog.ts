/** One line of an incident's delivery history per attempt, on any channel. The queue stores these. */
import type { DeliveryOutcome, DeliveryResult } from './webhookDelivery.ts';

export interface DeliveryLogEntry {
  channel: 'email' | 'webhook' | 'mqtt';
  /** Where it went: a mail address, a webhook URL without credentials or query, an MQTT topic. */
  target: string;
  /** The CloudEvent id / idempotency key of the message. */
  eventId: string;
  attempt: number;
  /** When the attempt started (ISO 8601). */
  at: string;
  outcome: DeliveryOutcome;
  /** HTTP status or SMTP reply code, when there was one. */
  status?: number;
  durationMs: number;
  error?: string;
}

export function webhookLogEntry(endpointUrl: string, eventId: string, at: Date, result: DeliveryResult): DeliveryLogEntry {
  return {
    channel: 'webhook',
    target: redactUrl(endpointUrl),
    eventId,
    attempt: result.attempt,
    at: at.toISOString(),
    outcome: result.outcome,
    durationMs: result.durationMs,
    ...(result.status !== undefined && { status: result.status }),
    ...(result.error !== undefined && { error: result.error }),
  };
}

/** Receivers often put a token in the query string or user info; the log is read by more people than the config. */
export function redactUrl(url: string): string {
  try {
    const u = new URL(url);
    return `${u.protocol}//${u.host}${u.pathname}${u.search ? '?…' : ''}`;
  } catch {
    return '(not a URL)';
  }
}
