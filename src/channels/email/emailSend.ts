/**
 * Sends a rendered e-mail over SMTP (nodemailer). Failures are classified for the queue: retry what may go
 * through later, give up on what the server will refuse again.
 */
import { createTransport, type SMTPTransportOptions, type Transporter } from 'nodemailer';
import type { RenderedEmail } from './emailRender.ts';

/**
 * nodemailer waits minutes by default; a queue job should fail fast and be retried instead.
 * Defaults: connection 10 s, greeting 10 s, socket inactivity 30 s.
 */
export const SMTP_TIMEOUT_DEFAULTS = { connectionTimeout: 10_000, greetingTimeout: 10_000, socketTimeout: 30_000 } as const;

/**
 * The longest one message's attempt may take in all, from connecting to the server's answer to the data: 60 s.
 * The timeouts above are idle timeouts, and a server that trickles its replies (a byte every few seconds) resets
 * them with every byte; this deadline does not move. Configured as `channels.email.smtp.deadlineMs`.
 */
export const SMTP_DEADLINE_DEFAULT_MS = 60_000;

/** The error code of an attempt ended by its deadline. */
export const DEADLINE_CODE = 'EDEADLINE';

/** The error code of an attempt ended because its channel closed (the worker stopping). */
export const CLOSED_CODE = 'ECLOSED';

export interface SendEmailOptions {
  /** The attempt's deadline in milliseconds; then the connection is closed and the send fails as retryable. Default `SMTP_DEADLINE_DEFAULT_MS`. */
  readonly deadlineMs?: number;
  /**
   * Ends the attempt when it aborts (the channel closing, src/channels/email/emailChannel.ts): the connection is
   * closed at once and the send fails as retryable, as at the deadline, so that a stopping worker is not held by a
   * server that does not answer and the message is left to a later attempt.
   */
  readonly signal?: AbortSignal;
}

export interface SentEmail {
  messageId: string;
  accepted: string[];
  /** Recipients the server refused while taking the message for the others. */
  rejected: string[];
}

export class EmailDeliveryError extends Error {
  override readonly name = 'EmailDeliveryError';
  constructor(
    message: string,
    /** True when the same message may go through later (connection trouble, 4xx replies). */
    readonly retryable: boolean,
    readonly code?: string,
    readonly responseCode?: number,
    options?: ErrorOptions,
  ) {
    super(message, options);
  }

  /**
   * The server answered with a refusal (an SMTP reply code), or no connection was made: the message was not taken.
   * False when it may have been (a timeout or a broken connection, possibly after the message's data went out).
   */
  get notTaken(): boolean {
    return this.responseCode !== undefined || this.code === 'EDNS' || /\b(ECONNREFUSED|ENOTFOUND|EAI_AGAIN|EHOSTUNREACH|ENETUNREACH)\b/.test(this.message);
  }
}

/**
 * Sends one message. Give SMTP options to open (and close) a connection for this message, or a transporter
 * (a pooled one, say) to reuse connections. Throws an `EmailDeliveryError`.
 *
 * The attempt ends at its deadline whatever the server does, and at once when `options.signal` aborts: the send is
 * aborted (nodemailer closes the connection) and the error is retryable, with `notTaken` false: the data may have
 * gone out and the server's answer may have been all that was missing, so the queue records the attempt as possibly
 * arrived.
 */
export async function sendEmail(transport: SMTPTransportOptions | Transporter, mail: RenderedEmail, options: SendEmailOptions = {}): Promise<SentEmail> {
  const deadlineMs = options.deadlineMs ?? SMTP_DEADLINE_DEFAULT_MS;
  const own = !isTransporter(transport);
  const transporter = isTransporter(transport) ? transport : createTransport({ ...SMTP_TIMEOUT_DEFAULTS, ...transport });
  const abort = new AbortController();
  let stop: (error: EmailDeliveryError) => void = () => {};
  // Raced as well as signalled, so that the deadline (or the channel's closing) holds for a transporter that ignores the signal.
  const stopped = new Promise<never>((_, reject) => {
    stop = (error) => {
      if (abort.signal.aborted) return;
      reject(error);
      abort.abort(error);
    };
  });
  // Awaited only by the race below; a send that throws before it must not leave this rejection unhandled.
  stopped.catch(() => {});
  const timer = setTimeout(
    () => stop(new EmailDeliveryError(`e-mail not sent (${DEADLINE_CODE}): no answer to the message within the deadline of ${deadlineMs} ms; connection closed`, true, DEADLINE_CODE)),
    deadlineMs,
  );
  const onClose = () => stop(new EmailDeliveryError(`e-mail not sent (${CLOSED_CODE}): the channel closed during the attempt (the worker is stopping); connection closed`, true, CLOSED_CODE));
  if (options.signal?.aborted === true) onClose();
  else options.signal?.addEventListener('abort', onClose, { once: true });
  try {
    const sending = transporter.sendMail({
      from: mail.from,
      to: mail.to,
      subject: mail.subject,
      text: mail.text,
      html: mail.html,
      headers: mail.headers,
      attachments: mail.attachments,
      // nodemailer ≥ 10 closes the connection of an aborted send (SMTPTransport.supportsAbortSignal).
      signal: abort.signal,
    } as Parameters<Transporter['sendMail']>[0]);
    const info = await Promise.race([sending, stopped]);
    return { messageId: String(info.messageId), accepted: addresses(info.accepted), rejected: addresses(info.rejected) };
  } catch (e) {
    // nodemailer's own error for the aborted send (EABORT) may come first; the deadline's (or the closing's) says what happened.
    if (abort.signal.aborted) throw abort.signal.reason as EmailDeliveryError;
    throw classifySmtpError(e);
  } finally {
    clearTimeout(timer);
    options.signal?.removeEventListener('abort', onClose);
    if (own) transporter.close();
  }
}

// Connection-level failures: the message never reached a server's judgement.
const CONNECTION_CODES = new Set(['ECONNECTION', 'ETIMEDOUT', 'ESOCKET', 'EDNS', 'ECONNREFUSED', 'ECONNRESET', 'EPROXY']);

/**
 * RFC 5321 §4.2.1: 4yz replies are transient, 5yz permanent. 503 (bad sequence of commands) is a session
 * fault, not a verdict on the message, so it is retried on a new connection.
 */
export function classifySmtpError(e: unknown): EmailDeliveryError {
  const err = e instanceof Error ? (e as Error & { code?: unknown; responseCode?: unknown }) : new Error(String(e));
  const code = 'code' in err && typeof err.code === 'string' ? err.code : undefined;
  const responseCode = 'responseCode' in err && typeof err.responseCode === 'number' ? err.responseCode : undefined;
  let retryable: boolean;
  if (responseCode !== undefined && responseCode >= 400 && responseCode < 500) retryable = true;
  else if (responseCode === 503) retryable = true;
  else if (responseCode !== undefined && responseCode >= 500 && responseCode < 600) retryable = false;
  else if (code !== undefined && CONNECTION_CODES.has(code)) retryable = true;
  // Bad envelope, bad message, failed authentication, bad configuration: the same again fails the same way.
  else if (code !== undefined) retryable = false;
  else retryable = true;
  const reply = responseCode !== undefined ? ` (SMTP ${responseCode})` : code !== undefined ? ` (${code})` : '';
  return new EmailDeliveryError(`e-mail not sent${reply}: ${err.message}`, retryable, code, responseCode, { cause: e });
}

function isTransporter(t: SMTPTransportOptions | Transporter): t is Transporter {
  return typeof (t as Transporter).sendMail === 'function';
}

function addresses(list: unknown): string[] {
  if (!Array.isArray(list)) return [];
  return list.map((a: unknown) => (typeof a === 'string' ? a : typeof a === 'object' && a !== null && 'address' in a ? String(a.address) : String(a)));
}
