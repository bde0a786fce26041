/** The webhook channel: a CloudEvent signed by Standard Webhooks, POSTed to each named endpoint; 410 Gone disables it. */
import { toCloudEvent, type IncidentCloudEvent } from '../../notify/cloudEvent.ts';
import { floodSummaryEvent } from '../../notify/floodControl.ts';
import type { ChannelDefinition } from '../channel.ts';
import { DeliveryRefused, DeliveryRetry } from '../errors.ts';
import { secretFrom } from '../secrets.ts';
import { deliverWebhook } from './webhookDelivery.ts';

export const webhookChannel: ChannelDefinition = {
  secretRefs: (channels) => channels.webhooks.flatMap((w) => w.secrets),
  configured: (channels) => channels.webhooks.length > 0,
  open(channels, { env, disabledEndpoints }) {
    return {
      async deliver({ effect, message, attempt }) {
        const c = channels.webhooks.find((w) => w.name === effect.target);
        if (c === undefined) throw new DeliveryRefused(`no webhook named "${effect.target}" in channels.webhooks`);
        const disabled = await disabledEndpoints?.reason(c.name);
        if (disabled !== undefined) return `webhook ${c.name}: not sent, the endpoint is disabled (${disabled})`;
        const endpoint = { url: c.url, secrets: c.secrets.map((s) => secretFrom(s, env, `channels.webhooks ${c.name}`)), timeoutMs: c.timeoutMs };
        const result = await deliverWebhook(endpoint, toCloudEvent(message, { time: effect.at }), { now: new Date(), attempt });
        const what = `webhook ${c.name}: ${result.error ?? result.status ?? 'no response'}`;
        switch (result.outcome) {
          case 'delivered':
            return what;
          case 'retry':
            throw new DeliveryRetry(what, result.retryAfterMs);
          case 'disable':
            await disabledEndpoints?.disable(c.name, `410 Gone at ${new Date().toISOString()}`);
            throw new DeliveryRefused(`${what}: the receiver answered 410 Gone and asks not to be called again; the endpoint is disabled until removed from the configuration`);
          case 'give-up':
            throw new DeliveryRefused(`${what}: the receiver refused the delivery`);
        }
      },
      async deliverSummary(s, window, attempt) {
        const c = channels.webhooks.find((w) => w.name === s.target);
        if (c === undefined) throw new DeliveryRefused(`no webhook named "${s.target}" in channels.webhooks`);
        const endpoint = { url: c.url, secrets: c.secrets.map((x) => secretFrom(x, env, `channels.webhooks ${c.name}`)), timeoutMs: c.timeoutMs };
        // The delivery signs and posts any CloudEvent; only its id and body are read.
        const result = await deliverWebhook(endpoint, floodSummaryEvent(s, window) as unknown as IncidentCloudEvent, { now: new Date(), attempt });
        const what = `flood summary by webhook ${c.name}: ${result.error ?? result.status ?? 'no response'}`;
        if (result.outcome === 'delivered') return what;
        if (result.outcome === 'retry') throw new DeliveryRetry(what, result.retryAfterMs);
        throw new DeliveryRefused(what);
      },
      async close() {},
    };
  },
};
