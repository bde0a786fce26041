/**
 * The outside world of the fault tests: a real SMTP server (npm smtp-server) and a real HTTP webhook receiver
 * that verifies every delivery with the reference Standard Webhooks verifier (npm standardwebhooks). Neither
 * de-duplicates anything: they record every raw delivery, so that a duplicate shows.
 */
import { randomBytes } from 'node:crypto';
import { createServer, type IncomingMessage, type Server, type ServerResponse } from 'node:http';
import type { AddressInfo } from 'node:net';
import { startMailReceiver, type MailReceiver as SharedReceiver } from '../../src/demo/mailReceiver.ts';
import { Webhook } from 'standardwebhooks';

export interface ReceivedMail {
  readonly messageId: string;
  readonly incidentId: string;
  readonly event: string;
  readonly to: string[];
  readonly at: number;
}

export interface MailReceiver {
  readonly port: number;
  readonly mails: ReceivedMail[];
  /** Starts listening on `port` (again); the port stays reserved for this receiver. */
  start(): Promise<void>;
  /** Stops listening; senders get "connection refused" until start(). */
  stop(): Promise<void>;
}

/** A mail receiver on `port`, not yet listening: the shared one (src/demo/mailReceiver.ts), stopped and started again. */
export function mailReceiver(port: number): MailReceiver {
  const mails: ReceivedMail[] = [];
  let server: SharedReceiver | undefined;
  return {
    port,
    mails,
    async start() {
      const s = await startMailReceiver({}, port);
      s.onMail((mail) =>
        mails.push({
          messageId: mail.parsed.messageId ?? '',
          incidentId: String(mail.parsed.headers.get('x-wearshift-incident') ?? ''),
          event: String(mail.parsed.headers.get('x-wearshift-event') ?? ''),
          to: [...mail.to],
          at: mail.receivedAt,
        }),
      );
      server = s;
    },
    async stop() {
      const s = server;
      server = undefined;
      await s?.close();
    },
  };
}

export interface WebhookAttempt {
  readonly id: string;
  /** 1 for the first request carrying this webhook-id. */
  readonly attempt: number;
  readonly at: number;
  /** The reference verifier accepted signature and timestamp. */
  readonly verified: boolean;
  /** The status written, or 'sender-gone' when the sender hung up before the answer. */
  readonly answer: number | 'sender-gone';
  readonly subject?: string;
  readonly type?: string;
  readonly body: string;
}

/** How to answer one request: a status after a delay, with headers. */
export interface Answer {
  status: number;
  delayMs?: number;
  headers?: Record<string, string>;
}

export interface WebhookReceiver {
  readonly url: string;
  readonly secret: string;
  readonly attempts: WebhookAttempt[];
  /** Deliveries answered 2xx, per webhook-id, counted raw. */
  delivered(): Map<string, number>;
  close(): Promise<void>;
}

export function webhookSecret(): string {
  return `whsec_${randomBytes(24).toString('base64')}`;
}

/** A receiver on a free port; `answer` decides each request's reply from its webhook-id and attempt number. */
export async function webhookReceiver(answer: (id: string, attempt: number) => Answer = () => ({ status: 204 })): Promise<WebhookReceiver> {
  const secret = webhookSecret();
  const verifier = new Webhook(secret);
  const attempts: WebhookAttempt[] = [];
  const seen = new Map<string, number>();
  const handle = async (req: IncomingMessage, res: ServerResponse) => {
    const chunks: Buffer[] = [];
    for await (const c of req) chunks.push(c as Buffer);
    const body = Buffer.concat(chunks).toString('utf8');
    const headers = Object.fromEntries(Object.entries(req.headers).map(([k, v]) => [k, String(v)]));
    const id = headers['webhook-id'] ?? '';
    const attempt = (seen.get(id) ?? 0) + 1;
    seen.set(id, attempt);
    const at = Date.now();
    let verified = false;
    let event: { subject?: string; type?: string } = {};
    try {
      event = verifier.verify(body, headers) as typeof event;
      verified = true;
    } catch {
      verified = false;
    }
    const reply = verified ? answer(id, attempt) : { status: 401 };
    if (reply.delayMs !== undefined) await new Promise((r) => setTimeout(r, reply.delayMs));
    const gone = res.socket === null || res.socket.destroyed;
    attempts.push({ id, attempt, at, verified, answer: gone ? 'sender-gone' : reply.status, body, ...(event.subject !== undefined && { subject: event.subject }), ...(event.type !== undefined && { type: event.type }) });
    if (gone) return;
    res.writeHead(reply.status, reply.headers ?? {});
    res.end();
  };
  const server: Server = createServer((req, res) => void handle(req, res));
  await new Promise<void>((resolve) => server.listen(0, '127.0.0.1', () => resolve()));
  const port = (server.address() as AddressInfo).port;
  return {
    url: `http://127.0.0.1:${port}/hooks/wearshift`,
    secret,
    attempts,
    delivered() {
      const counts = new Map<string, number>();
      for (const a of attempts) if (a.verified && typeof a.answer === 'number' && a.answer >= 200 && a.answer < 300) counts.set(a.id, (counts.get(a.id) ?? 0) + 1);
      return counts;
    },
    async close() {
      server.closeAllConnections();
      await new Promise<void>((resolve) => server.close(() => resolve()));
    },
  };
}
