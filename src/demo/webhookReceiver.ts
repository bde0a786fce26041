/**
 * The demo's webhook endpoint: a plain node:http server that checks every delivery's Standard Webhooks
 * signature (npm `standardwebhooks`) on the raw body, as an integrator's receiver would, and keeps the headers
 * and the raw body of each.
 */
import { createServer, type IncomingHttpHeaders } from 'node:http';
import type { AddressInfo } from 'node:net';
import { Webhook } from 'standardwebhooks';

export interface ReceivedWebhook {
  readonly seq: number;
  readonly receivedAt: number;
  readonly headers: IncomingHttpHeaders;
  readonly rawBody: string;
  /** The signature checked out against the shared secret. */
  readonly verified: boolean;
  /** The CloudEvent `type`, when the body parsed. */
  readonly type?: string;
}

export interface WebhookReceiver {
  readonly url: string;
  readonly received: readonly ReceivedWebhook[];
  close(): Promise<void>;
}

/** `secret`: the `whsec_<base64>` secret the sender signs with. */
export async function startWebhookReceiver(secret: string, path = '/wearshift'): Promise<WebhookReceiver> {
  const verifier = new Webhook(secret);
  const received: ReceivedWebhook[] = [];
  const server = createServer((req, res) => {
    const chunks: Buffer[] = [];
    req.on('data', (c: Buffer) => chunks.push(c));
    req.on('end', () => {
      const rawBody = Buffer.concat(chunks).toString('utf8');
      let verified = true;
      let type: string | undefined;
      try {
        type = (verifier.verify(rawBody, req.headers as Record<string, string>) as { type?: string }).type;
      } catch {
        verified = false;
      }
      received.push({ seq: received.length + 1, receivedAt: Date.now(), headers: req.headers, rawBody, verified, ...(type !== undefined && { type }) });
      // A forged or stale delivery is refused, so the sender's log shows it too.
      res.writeHead(req.url === path && verified ? 204 : 401).end();
    });
  });
  await new Promise<void>((resolve, reject) => {
    server.once('error', reject);
    server.listen(0, '127.0.0.1', () => resolve());
  });
  const { port } = server.address() as AddressInfo;
  return {
    url: `http://127.0.0.1:${port}${path}`,
    received,
    close: () =>
      new Promise<void>((resolve) => {
        server.closeAllConnections();
        server.close(() => resolve());
      }),
  };
}
