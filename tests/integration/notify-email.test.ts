/**
 * E-mail against a real SMTP server (npm smtp-server on a free port); the received message is parsed with
 * mailparser, an independent MIME parser, so that what we check is what a mail client would see.
 */
import { createServer, type AddressInfo } from 'node:net';
import type { SMTPServerOptions } from 'smtp-server';
import { startMailReceiver, type MailReceiver } from '../../src/demo/mailReceiver.ts';
import { afterEach, describe, expect, it } from 'vitest';
import { signAckLink, ackLinkUrl } from '../../src/notify/ackLink.ts';
import { renderIncidentEmail } from '../../src/channels/email/emailRender.ts';
import { EmailDeliveryError, sendEmail } from '../../src/channels/email/emailSend.ts';
import { incidentMessage } from '../unit/notify-fixtures.ts';
import { notificationChannels } from '../../src/channels/openChannels.ts';
import { ChannelsSchema } from '../../src/domain/escalationConfig.ts';
import type { FloodSummary } from '../../src/notify/floodControl.ts';
import { silentLogger } from '../../src/telemetry/logger.ts';

const receivers: MailReceiver[] = [];
afterEach(async () => {
  await Promise.all(receivers.splice(0).map((r) => r.close()));
});

async function startSmtp(extra: Partial<SMTPServerOptions> = {}): Promise<MailReceiver> {
  const receiver = await startMailReceiver(extra);
  receivers.push(receiver);
  return receiver;
}

const transport = (port: number) => ({ host: '127.0.0.1', port, secure: false, ignoreTLS: true });

function mail(overrides: Parameters<typeof incidentMessage>[1] = {}) {
  const token = signAckLink({ incidentId: 'INC-2026-0007', recipient: 'oncall@plant.example', expiresAt: new Date('2026-03-04T08:00:00Z') }, 'ack-secret-0123456789abcdef');
  const ackUrl = ackLinkUrl('https://wearshift.plant.example', token);
  const rendered = renderIncidentEmail(incidentMessage({}, overrides), {
    from: 'wearshift <alerts@plant.example>',
    to: ['oncall@plant.example', 'reliability@plant.example'],
    ackUrl,
    ackExpiresAt: new Date('2026-03-04T08:00:00Z'),
  });
  return { rendered, ackUrl };
}

describe('sending incident e-mail over SMTP', () => {
  it('arrives with subject, both parts, the link and our headers intact', async () => {
    const smtp = await startSmtp();
    const { rendered, ackUrl } = mail({ unit: 'PS2-P3 Ölpumpe' });
    const sent = await sendEmail(transport(smtp.port), rendered);
    expect(smtp.received).toHaveLength(1);
    const got = smtp.received[0]!;
    expect(got.to).toEqual(['oncall@plant.example', 'reliability@plant.example']);
    expect(sent.accepted).toEqual(['oncall@plant.example', 'reliability@plant.example']);
    expect(sent.messageId).toBe(rendered.headers['Message-ID']);
    expect(got.parsed.messageId).toBe(rendered.headers['Message-ID']);
    // Non-ASCII goes out as an RFC 2047 encoded word and comes back as the same text.
    expect(got.parsed.subject).toBe(rendered.subject);
    expect(got.parsed.subject).toContain('PS2-P3 Ölpumpe / gearbox');
    expect(got.parsed.text).toContain(ackUrl);
    expect(got.parsed.text).toContain('CUSUM statistic 5.612 against its limit 5');
    expect(got.parsed.html).toContain(`href="${ackUrl}"`);
    expect(got.parsed.headers.get('x-wearshift-incident')).toBe('INC-2026-0007');
    expect(got.parsed.headers.get('auto-submitted')).toBe('auto-generated');
    expect(got.parsed.references).toBe(rendered.headers.References);
  });

  it('keeps a hostile unit name from adding headers or recipients', async () => {
    const smtp = await startSmtp();
    const { rendered } = mail({ unit: 'PS2\r\nBcc: victim@elsewhere.example\r\nX-Injected: yes', id: 'INC-9\r\nX-Injected: yes' });
    await sendEmail(transport(smtp.port), rendered);
    const got = smtp.received[0]!;
    expect(got.to).not.toContain('victim@elsewhere.example');
    expect(got.parsed.headers.has('x-injected')).toBe(false);
    expect(got.parsed.headers.has('bcc')).toBe(false);
    expect(got.parsed.subject).toContain('PS2 Bcc: victim@elsewhere.example X-Injected: yes / gearbox');
    expect(got.parsed.headers.get('x-wearshift-incident')).toBe('INC-9 X-Injected: yes');
    const headerBlock = got.raw.slice(0, got.raw.indexOf('\r\n\r\n'));
    expect(headerBlock).not.toMatch(/^X-Injected:/im);
  });

  it('sends a resend with the same Message-ID', async () => {
    const smtp = await startSmtp();
    await sendEmail(transport(smtp.port), mail().rendered);
    await sendEmail(transport(smtp.port), mail().rendered);
    expect(smtp.received.map((r) => r.parsed.messageId)).toEqual([mail().rendered.headers['Message-ID'], mail().rendered.headers['Message-ID']]);
  });

  it('fails as retryable when no SMTP server listens', async () => {
    const port = await freePort();
    const error = await sendEmail({ ...transport(port), connectionTimeout: 2000 }, mail().rendered).catch((e: unknown) => e);
    expect(error).toBeInstanceOf(EmailDeliveryError);
    expect((error as EmailDeliveryError).retryable).toBe(true);
    expect((error as EmailDeliveryError).message).toMatch(/ECONNECTION|ESOCKET|ECONNREFUSED/);
  });

  it('retries a 4xx reply and gives up on a 5xx reply (RFC 5321 §4.2.1)', async () => {
    const reject = (code: number, text: string): Partial<SMTPServerOptions> => ({
      onRcptTo(_address, _session, callback) {
        callback(Object.assign(new Error(text), { responseCode: code }));
      },
    });
    const busy = await startSmtp(reject(451, 'Requested action aborted: local error in processing'));
    const transient = (await sendEmail(transport(busy.port), mail().rendered).catch((e: unknown) => e)) as EmailDeliveryError;
    expect(transient).toBeInstanceOf(EmailDeliveryError);
    expect(transient.responseCode).toBe(451);
    expect(transient.retryable).toBe(true);

    const refusing = await startSmtp(reject(550, 'No such user here'));
    const permanent = (await sendEmail(transport(refusing.port), mail().rendered).catch((e: unknown) => e)) as EmailDeliveryError;
    expect(permanent.responseCode).toBe(550);
    expect(permanent.retryable).toBe(false);
    expect(permanent.message).toContain('SMTP 550');
    expect(busy.received).toHaveLength(0);
    expect(refusing.received).toHaveLength(0);
  });
});

describe('the alarm-flood summary by e-mail', () => {
  it('carries a Message-ID of the sender’s domain that a resend keeps and another window does not share', async () => {
    const smtp = await startSmtp();
    const channels = notificationChannels(ChannelsSchema.parse({ email: { from: 'wearshift <alerts@plant.example>', smtp: { host: '127.0.0.1', port: smtp.port, secure: false } } }), {
      logger: silentLogger(),
      env: {},
    });
    const summary = (from: string, until: string): FloodSummary => ({
      channel: 'email',
      target: 'oncall@plant.example',
      window: { from, until },
      maxMessages: 10,
      held: [{ incidentId: 'PS2-P3/gearbox@LAB-0042', unit: 'PS2-P3', component: 'gearbox', severity: 'alarm', type: 'opened', url: 'https://wearshift.plant.example/incidents/x', at: from }],
    });
    const first = summary('2026-03-01T08:00:00.000Z', '2026-03-01T08:10:00.000Z');
    // A retry after a lost reply: the same summary again.
    await channels.deliverSummary(first, 0, 1);
    await channels.deliverSummary(first, 0, 2);
    await channels.deliverSummary(summary('2026-03-01T08:10:00.000Z', '2026-03-01T08:20:00.000Z'), 1, 1);
    await channels.close();
    const ids = smtp.received.map((m) => m.parsed.messageId);
    expect(ids).toHaveLength(3);
    expect(ids[0]).toMatch(/^<[0-9a-f]{32}\.flood-summary@plant\.example>$/);
    expect(ids[1]).toBe(ids[0]);
    expect(ids[2]).not.toBe(ids[0]);
    expect(smtp.received[0]!.parsed.headers.get('x-wearshift-type')).toBe('flood-summary');
  });

  it('shows its window in the site zone the channels were opened with (display.timeZone), as the incident e-mails do', async () => {
    const smtp = await startSmtp();
    const channels = notificationChannels(ChannelsSchema.parse({ email: { from: 'wearshift <alerts@plant.example>', smtp: { host: '127.0.0.1', port: smtp.port, secure: false } } }), {
      logger: silentLogger(),
      env: {},
      timeZone: 'Europe/Berlin',
    });
    const summary: FloodSummary = {
      channel: 'email',
      target: 'oncall@plant.example',
      window: { from: '2026-03-01T08:00:00.000Z', until: '2026-03-01T08:10:00.000Z' },
      maxMessages: 10,
      held: [{ incidentId: 'PS2-P3/gearbox@LAB-0042', unit: 'PS2-P3', component: 'gearbox', severity: 'alarm', type: 'opened', url: 'https://wearshift.plant.example/incidents/x', at: '2026-03-01T08:04:00.000Z' }],
    };
    await channels.deliverSummary(summary, 0, 1);
    await channels.close();
    expect(smtp.received).toHaveLength(1);
    // Europe/Berlin is UTC+1 in March 2026 (IANA tz database).
    const text = smtp.received[0]!.parsed.text ?? '';
    expect(text).toContain('between 2026-03-01T09:00+01:00 and 2026-03-01T09:10+01:00');
    expect(text).toContain('site zone Europe/Berlin');
  });
});

/** A port that was free a moment ago: bind to 0, read it, close. */
async function freePort(): Promise<number> {
  const server = createServer();
  await new Promise<void>((resolve) => server.listen(0, '127.0.0.1', () => resolve()));
  const { port } = server.address() as AddressInfo;
  await new Promise<void>((resolve) => server.close(() => resolve()));
  return port;
}
