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
 */
export async function sendEmail(transport: SMTPTransportOptions | Transporter, mail: RenderedEmail): Promise<SentEmail> {
  const own = !isTransporter(transport);
  const transporter = isTransporter(transport) ? transport : createTransport({ ...SMTP_TIMEOUT_DEFAULTS, ...transport });
  try {
    const info = await transporter.sendMail({ from: mail.from, to: mail.to, subject: mail.subject, text: mail.text, html: mail.html, headers: mail.headers, attachments: mail.attachments });
    return { messageId: String(info.messageId), accepted: addresses(info.accepted), rejected: addresses(info.rejected) };
  } catch (e) {
    throw classifySmtpError(e);
  } finally {
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
