/**
 * The webhook channel: a CloudEvent signed by Standard Webhooks, POSTed to each named endpoint. 410 Gone disables the
 * endpoint at that URL: later messages to it fail without a request (each with a warning), so that
 * `wearshift failed list` shows them and `wearshift failed retry` sends them once the endpoint is enabled again
 * (`wearshift failed enable-webhook NAME`, or another URL in the configuration).
 */
import { toCloudEvent, type IncidentCloudEvent } from '../../notify/cloudEvent.ts';
import { floodSummaryEvent } from '../../notify/floodControl.ts';
import type { ChannelDefinition } from '../channel.ts';
import { DeliveryRefused, DeliveryRetry } from '../errors.ts';
import { webhookSecretProblem } from '../../domain/webhookSecret.ts';
import { secretFrom } from '../secrets.ts';
import { deliverWebhook, type DeliveryResult, type WebhookEndpoint } from './webhookDelivery.ts';

export const webhookChannel: ChannelDefinition = {
  secretRefs: (channels) => channels.webhooks.flatMap((w) => w.secrets.map((ref) => ({ ref, usedBy: `channels.webhooks "${w.name}"`, problem: webhookSecretProblem }))),
  configured: (channels) => channels.webhooks.length > 0,
  open(channels, { env, disabledEndpoints, logger }) {
    /** Refuses a message to an endpoint that answered 410 Gone at its configured URL. */
    const refuseIfDisabled = async (c: { name: string; url: string }, what: Record<string, unknown>) => {
      const disabled = await disabledEndpoints?.reason(c.name, c.url);
      if (disabled === undefined) return;
      logger.warn({ channel: `webhook:${c.name}`, ...what, disabled }, 'webhook endpoint disabled by 410 Gone: message not sent');
      throw new DeliveryRefused(
        `webhook ${c.name}: not sent, the endpoint is disabled (${disabled}); \`wearshift failed enable-webhook ${c.name}\` enables it again, then \`wearshift failed retry\` sends this message`,
      );
    };
    // Aborted by close(): a request in flight ends at once instead of holding a stopping worker up to its timeout.
    const closing = new AbortController();
    const inFlight = new Set<Promise<DeliveryResult>>();
    /** One request; one the closing ends, or that finds the channel closed, is retryable and never counted as delivered. */
    const post = async (endpoint: WebhookEndpoint, event: IncidentCloudEvent, attempt: number) => {
      const request = deliverWebhook(endpoint, event, { now: new Date(), attempt, signal: closing.signal });
      inFlight.add(request);
      try {
        return await request;
      } finally {
        inFlight.delete(request);
      }
    };
    return {
      async deliver({ effect, message, attempt }) {
        const c = channels.webhooks.find((w) => w.name === effect.target);
        if (c === undefined) throw new DeliveryRefused(`no webhook named "${effect.target}" in channels.webhooks`);
        await refuseIfDisabled(c, { incidentId: effect.incidentId, type: effect.type });
        const endpoint = { url: c.url, secrets: c.secrets.map((s) => secretFrom(s, env, `channels.webhooks ${c.name}`)), timeoutMs: c.timeoutMs };
        const result = await post(endpoint, toCloudEvent(message, { time: effect.at, sourceTemplate: c.source }), attempt);
        const what = `webhook ${c.name}: ${result.error ?? result.status ?? 'no response'}`;
        switch (result.outcome) {
          case 'delivered':
            return what;
          case 'retry':
            throw new DeliveryRetry(what, result.retryAfterMs, result.status !== undefined || result.notConnected === true);
          case 'disable':
            await disabledEndpoints?.disable(c.name, c.url, `410 Gone at ${new Date().toISOString()}`);
            throw new DeliveryRefused(
              `${what}: the receiver answered 410 Gone and asks not to be called again; the endpoint is disabled until its URL changes in the configuration or \`wearshift failed enable-webhook ${c.name}\``,
            );
          case 'give-up':
            throw new DeliveryRefused(`${what}: the receiver refused the delivery`);
        }
      },
      async deliverSummary(s, window, attempt) {
        const c = channels.webhooks.find((w) => w.name === s.target);
        if (c === undefined) throw new DeliveryRefused(`no webhook named "${s.target}" in channels.webhooks`);
        await refuseIfDisabled(c, { floodSummary: window });
        const endpoint = { url: c.url, secrets: c.secrets.map((x) => secretFrom(x, env, `channels.webhooks ${c.name}`)), timeoutMs: c.timeoutMs };
        // The delivery signs and posts any CloudEvent; only its id and body are read.
        const result = await post(endpoint, floodSummaryEvent(s, window) as unknown as IncidentCloudEvent, attempt);
        const what = `flood summary by webhook ${c.name}: ${result.error ?? result.status ?? 'no response'}`;
        if (result.outcome === 'delivered') return what;
        if (result.outcome === 'retry') throw new DeliveryRetry(what, result.retryAfterMs, result.status !== undefined || result.notConnected === true);
        if (result.outcome === 'disable') await disabledEndpoints?.disable(c.name, c.url, `410 Gone at ${new Date().toISOString()}`);
        throw new DeliveryRefused(what);
      },
      /**
       * Ends every request in flight (aborted, its connection closed, its delivery failed as retryable, so that the
       * notify job stays pending and runs again; it may have reached the receiver, which drops the repeat by its
       * `webhook-id`) and refuses new ones for a retry without a request; resolves once the requests have ended.
       */
      async close() {
        closing.abort();
        await Promise.allSettled([...inFlight]);
      },
    };
  },
};
