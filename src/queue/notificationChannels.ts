/**
 * Delivery of one notification over its channel: e-mail (SMTP), webhook (Standard Webhooks, CloudEvents) or
 * MQTT. Failures are sorted for the queue: `DeliveryRetry` may go through later (the notify worker retries it
 * with backoff, or after the receiver's Retry-After); anything the receiver will refuse again is unrecoverable.
 */
import { hostname } from 'node:os';
import { UnrecoverableError } from 'bullmq';
import type { Channels } from '../domain/escalationConfig.ts';
import type { NotifyEffect } from '../incidents/model.ts';
import { ackLinkUrl, signAckLink } from '../notify/ackLink.ts';
import { toCloudEvent } from '../notify/cloudEvent.ts';
import { renderIncidentEmail, type EmailChart } from '../notify/emailRender.ts';
import { EmailDeliveryError, sendEmail } from '../notify/emailSend.ts';
import { asksForAcknowledgement, type IncidentMessage } from '../notify/message.ts';
import { createMqttPublisher, type MqttPublisher } from '../notify/mqttPublisher.ts';
import { deliverWebhook } from '../notify/webhookDelivery.ts';
import { floodSummaryEvent, renderFloodSummaryEmail, type FloodSummary } from '../notify/floodControl.ts';
import type { IncidentCloudEvent } from '../notify/cloudEvent.ts';
import type { DisabledEndpoints } from './disabledEndpoints.ts';
import type { Logger } from '../runtime/logger.ts';

export class DeliveryRetry extends Error {
  override readonly name = 'DeliveryRetry';
  constructor(
    message: string,
    /** The receiver asked for this wait before the next attempt. */
    readonly retryAfterMs?: number,
  ) {
    super(message);
  }
}

export interface NotificationChannels {
  /** Delivers one message (an e-mail may carry the trend chart inline); resolves with a line for the job's return value. */
  deliver(effect: NotifyEffect, message: IncidentMessage, attempt: number, chart?: EmailChart): Promise<string>;
  /** Delivers the summary of an alarm flood's held-back messages to its target (src/notify/floodControl.ts). */
  deliverSummary(summary: FloodSummary, window: number, attempt: number): Promise<string>;
  close(): Promise<void>;
}

export interface NotificationChannelOptions {
  readonly logger: Logger;
  readonly env?: NodeJS.ProcessEnv;
  /** Longest wait for an MQTT broker's acknowledgement. Default 30 000 ms. */
  readonly mqttTimeoutMs?: number;
  /** Where a 410 Gone is remembered; without it, a 410 fails only the delivery at hand. */
  readonly disabledEndpoints?: DisabledEndpoints;
}

/** Secrets are environment variable names in the configuration; a literal `whsec_` value is allowed for webhooks. */
function secretFrom(ref: string, env: NodeJS.ProcessEnv, what: string): string {
  if (ref.startsWith('whsec_')) return ref;
  const value = env[ref];
  if (value === undefined || value === '') throw new Error(`${what}: environment variable ${ref} is not set`);
  return value;
}

export function notificationChannels(channels: Channels, options: NotificationChannelOptions): NotificationChannels {
  const env = options.env ?? process.env;
  const publishers = new Map<string, MqttPublisher>();
  const mqttTimeoutMs = options.mqttTimeoutMs ?? 30_000;

  const publisher = (name: string): MqttPublisher => {
    const existing = publishers.get(name);
    if (existing !== undefined) return existing;
    const c = channels.mqtt.find((m) => m.name === name);
    if (c === undefined) throw new UnrecoverableError(`no MQTT channel named "${name}" in channels.mqtt`);
    const created = createMqttPublisher({
      url: c.url,
      // One session per process: two processes sharing a client id would keep taking the session from each other.
      clientId: `wearshift-${name}-${hostname()}-${process.pid}`,
      topicTemplate: c.topic,
      qos: c.qos === 0 ? 1 : c.qos,
      ...(c.username !== undefined && { username: c.username }),
      ...(c.passwordEnv !== undefined && { password: secretFrom(c.passwordEnv, env, `channels.mqtt ${name}`) }),
      onError: (e) => options.logger.warn({ channel: `mqtt:${name}`, err: e.message }, 'MQTT connection error'),
    });
    publishers.set(name, created);
    return created;
  };

  const smtpTransport = () => {
    const smtp = channels.email!.smtp;
    return {
      host: smtp.host,
      port: smtp.port,
      ...(smtp.secure !== undefined && { secure: smtp.secure }),
      ...(smtp.user !== undefined && { auth: { user: smtp.user, pass: smtp.passwordEnv === undefined ? '' : secretFrom(smtp.passwordEnv, env, 'channels.email.smtp') } }),
    };
  };

  const summary = async (s: FloodSummary, window: number, attempt: number): Promise<string> => {
    const event = floodSummaryEvent(s, window);
    switch (s.channel) {
      case 'email': {
        if (channels.email === undefined) throw new UnrecoverableError('a flood summary by e-mail, but channels.email is not configured');
        try {
          const sent = await sendEmail(smtpTransport(), renderFloodSummaryEmail(s, { from: channels.email.from, to: s.target }));
          return `flood summary by email ${s.target}: ${s.held.length} held back, ${sent.messageId}`;
        } catch (e) {
          if (e instanceof EmailDeliveryError) throw e.retryable ? new DeliveryRetry(e.message) : new UnrecoverableError(e.message);
          throw e;
        }
      }
      case 'webhook': {
        const c = channels.webhooks.find((w) => w.name === s.target);
        if (c === undefined) throw new UnrecoverableError(`no webhook named "${s.target}" in channels.webhooks`);
        const endpoint = { url: c.url, secrets: c.secrets.map((x) => secretFrom(x, env, `channels.webhooks ${c.name}`)), timeoutMs: c.timeoutMs };
        // The delivery signs and posts any CloudEvent; only its id and body are read.
        const result = await deliverWebhook(endpoint, event as unknown as IncidentCloudEvent, { now: new Date(), attempt });
        const what = `flood summary by webhook ${c.name}: ${result.status ?? result.error ?? 'no response'}`;
        if (result.outcome === 'delivered') return what;
        if (result.outcome === 'retry') throw new DeliveryRetry(what, result.retryAfterMs);
        throw new UnrecoverableError(what);
      }
      case 'mqtt': {
        try {
          const { topic } = await publisher(s.target).publishSummary(event, { signal: AbortSignal.timeout(mqttTimeoutMs) });
          return `flood summary by mqtt ${s.target}: ${topic}`;
        } catch (e) {
          if (e instanceof UnrecoverableError) throw e;
          throw new DeliveryRetry(`mqtt ${s.target}: ${(e as Error).message}`);
        }
      }
    }
  };

  const email = async (effect: NotifyEffect, message: IncidentMessage, chart: EmailChart | undefined): Promise<string> => {
    const cfg = channels.email;
    if (cfg === undefined) throw new UnrecoverableError('an e-mail notification, but channels.email is not configured');
    const links = channels.ackLinks;
    const ack =
      links !== undefined && asksForAcknowledgement(message)
        ? (() => {
            const expiresAt = new Date(Date.now() + links.ttlHours * 3_600_000);
            // The variable may list several secrets during a rotation; links are signed with the first.
            const secret = secretFrom(links.secretEnv, env, 'channels.ackLinks').split(',')[0]!.trim();
            const token = signAckLink({ incidentId: effect.incidentId, recipient: effect.target, expiresAt }, secret);
            return { ackUrl: ackLinkUrl(links.baseUrl, token), ackExpiresAt: expiresAt };
          })()
        : {};
    const mail = renderIncidentEmail(message, { from: cfg.from, to: effect.target, ...ack, ...(chart && { chart }) });
    const smtp = cfg.smtp;
    try {
      const sent = await sendEmail(
        {
          host: smtp.host,
          port: smtp.port,
          ...(smtp.secure !== undefined && { secure: smtp.secure }),
          ...(smtp.user !== undefined && { auth: { user: smtp.user, pass: smtp.passwordEnv === undefined ? '' : secretFrom(smtp.passwordEnv, env, 'channels.email.smtp') } }),
        },
        mail,
      );
      if (sent.accepted.length === 0) throw new UnrecoverableError(`e-mail to ${effect.target}: the server refused the recipient`);
      return `email ${effect.target}: ${sent.messageId}`;
    } catch (e) {
      if (e instanceof EmailDeliveryError) {
        if (e.retryable) throw new DeliveryRetry(e.message);
        throw new UnrecoverableError(e.message);
      }
      throw e;
    }
  };

  const webhook = async (effect: NotifyEffect, message: IncidentMessage, attempt: number): Promise<string> => {
    const c = channels.webhooks.find((w) => w.name === effect.target);
    if (c === undefined) throw new UnrecoverableError(`no webhook named "${effect.target}" in channels.webhooks`);
    const disabled = await options.disabledEndpoints?.reason(c.name);
    if (disabled !== undefined) return `webhook ${c.name}: not sent, the endpoint is disabled (${disabled})`;
    const endpoint = { url: c.url, secrets: c.secrets.map((s) => secretFrom(s, env, `channels.webhooks ${c.name}`)), timeoutMs: c.timeoutMs };
    const result = await deliverWebhook(endpoint, toCloudEvent(message, { time: effect.at }), { now: new Date(), attempt });
    const what = `webhook ${c.name}: ${result.status ?? result.error ?? 'no response'}`;
    switch (result.outcome) {
      case 'delivered':
        return what;
      case 'retry':
        throw new DeliveryRetry(what, result.retryAfterMs);
      case 'disable':
        await options.disabledEndpoints?.disable(c.name, `410 Gone at ${new Date().toISOString()}`);
        throw new UnrecoverableError(`${what}: the receiver answered 410 Gone and asks not to be called again; the endpoint is disabled until removed from the configuration`);
      case 'give-up':
        throw new UnrecoverableError(`${what}: the receiver refused the delivery`);
    }
  };

  const mqtt = async (effect: NotifyEffect, message: IncidentMessage): Promise<string> => {
    const signal = AbortSignal.timeout(mqttTimeoutMs);
    try {
      const { topic } = await publisher(effect.target).publish(toCloudEvent(message, { time: effect.at }), { signal });
      return `mqtt ${effect.target}: ${topic}`;
    } catch (e) {
      if (e instanceof UnrecoverableError) throw e;
      throw new DeliveryRetry(`mqtt ${effect.target}: ${(e as Error).message}`);
    }
  };

  return {
    async deliver(effect, message, attempt, chart) {
      switch (effect.channel) {
        case 'email':
          return email(effect, message, chart);
        case 'webhook':
          return webhook(effect, message, attempt);
        case 'mqtt':
          return mqtt(effect, message);
      }
    },
    deliverSummary: summary,
    async close() {
      await Promise.all([...publishers.values()].map((p) => p.close()));
    },
  };
}
