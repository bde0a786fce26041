/**
 * The demo's mail server: a real SMTP server (smtp-server) on a free local port that keeps every message as
 * it arrived (the raw DATA, ready to be written as an .eml file) beside its parsed form. The SMTP server and the mail
 * parser are development dependencies (a production install has neither): they are loaded when the demo starts.
 */
import type { AddressInfo } from 'node:net';
import type { ParsedMail } from 'mailparser';
import type { SMTPServerOptions } from 'smtp-server';
import { InputError } from '../domain/errors.ts';

export interface ReceivedMail {
  /** Arrival order, from 1. */
  readonly seq: number;
  readonly receivedAt: number;
  /** Envelope recipients. */
  readonly to: readonly string[];
  readonly raw: string;
  readonly parsed: ParsedMail;
}

export interface MailReceiver {
  readonly port: number;
  readonly received: readonly ReceivedMail[];
  /** Called for every message once it is parsed. */
  onMail(listener: (mail: ReceivedMail) => void): void;
  close(): Promise<void>;
}

async function demoMailPackages() {
  try {
    const [{ simpleParser }, { SMTPServer }] = await Promise.all([import('mailparser'), import('smtp-server')]);
    return { simpleParser, SMTPServer };
  } catch {
    throw new InputError('the demo needs its development dependencies (smtp-server, mailparser), which a production install leaves out: run `npm ci` without --omit=dev');
  }
}

/** `extra` adds to or overrides the server's options (a test's refusals, say); `port` 0 takes a free one. */
export async function startMailReceiver(extra: Partial<SMTPServerOptions> = {}, port = 0): Promise<MailReceiver> {
  const { simpleParser, SMTPServer } = await demoMailPackages();
  const received: ReceivedMail[] = [];
  const listeners: ((mail: ReceivedMail) => void)[] = [];
  const server = new SMTPServer({
    authOptional: true,
    // A local receiver without a certificate: offering STARTTLS would make the sender try it and fail.
    disabledCommands: ['STARTTLS'],
    logger: false,
    onData(stream, session, callback) {
      const chunks: Buffer[] = [];
      stream.on('data', (c: Buffer) => chunks.push(c));
      stream.on('end', () => {
        const raw = Buffer.concat(chunks).toString('utf8');
        simpleParser(raw)
          .then((parsed) => {
            const mail: ReceivedMail = { seq: received.length + 1, receivedAt: Date.now(), to: session.envelope.rcptTo.map((r) => r.address), raw, parsed };
            received.push(mail);
            callback();
            for (const l of listeners) l(mail);
          })
          .catch(callback);
      });
    },
    ...extra,
  });
  await new Promise<void>((resolve, reject) => {
    server.once('error', reject);
    server.listen(port, '127.0.0.1', () => resolve());
  });
  return {
    port: (server.server.address() as AddressInfo).port,
    received,
    onMail: (l) => void listeners.push(l),
    close: () => new Promise<void>((resolve) => server.close(() => resolve())),
  };
}
