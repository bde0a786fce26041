/** The MQTT channel: the CloudEvent published to each named broker, one session per broker and worker. */
import { hostname } from 'node:os';
import { toCloudEvent } from '../../notify/cloudEvent.ts';
import { floodSummaryEvent } from '../../notify/floodControl.ts';
import type { ChannelDefinition } from '../channel.ts';
import { DeliveryRefused, DeliveryRetry } from '../errors.ts';
import { secretFrom } from '../secrets.ts';
import { createMqttPublisher, type MqttPublisher } from './mqttPublisher.ts';

/**
 * The client id a worker publishes to a channel's broker with: `wearshift-<channel>-<worker>`, the worker being
 * `WEARSHIFT_WORKER_ID` or else the host name; characters other than letters, digits, `.`, `_` and `-` become `-`.
 * It stays the same across restarts, so that the broker finds the worker's persistent session (`clean: false`) again
 * instead of keeping one more abandoned session per restart. Two processes must not share it (the broker would hand
 * the session back and forth between them): several workers on one host need a `WEARSHIFT_WORKER_ID` each.
 */
export function mqttClientId(channel: string, env: NodeJS.ProcessEnv, host: string = hostname()): string {
  const worker = env.WEARSHIFT_WORKER_ID?.trim() || host;
  return `wearshift-${channel}-${worker}`.replace(/[^A-Za-z0-9._-]/g, '-');
}

export const mqttChannel: ChannelDefinition = {
  secretRefs: (channels) => channels.mqtt.flatMap((m) => (m.passwordEnv === undefined ? [] : [{ ref: m.passwordEnv, usedBy: `channels.mqtt "${m.name}" (the broker password)` }])),
  configured: (channels) => channels.mqtt.length > 0,
  open(channels, { env, logger, mqttTimeoutMs }) {
    const publishers = new Map<string, MqttPublisher>();
    const publisher = (name: string): MqttPublisher => {
      const existing = publishers.get(name);
      if (existing !== undefined) return existing;
      const c = channels.mqtt.find((m) => m.name === name);
      if (c === undefined) throw new DeliveryRefused(`no MQTT channel named "${name}" in channels.mqtt`);
      const created = createMqttPublisher({
        url: c.url,
        clientId: mqttClientId(name, env),
        topicTemplate: c.topic,
        qos: c.qos,
        ...(c.username !== undefined && { username: c.username }),
        ...(c.passwordEnv !== undefined && { password: secretFrom(c.passwordEnv, env, `channels.mqtt ${name}`) }),
        onError: (e) => logger.warn({ channel: `mqtt:${name}`, err: e.message }, 'MQTT connection error'),
      });
      publishers.set(name, created);
      return created;
    };
    return {
      async deliver({ effect, message }) {
        const target = publisher(effect.target);
        // publisher() has found the channel, or refused the delivery.
        const { source } = channels.mqtt.find((m) => m.name === effect.target)!;
        try {
          const { topic } = await target.publish(toCloudEvent(message, { time: effect.at, sourceTemplate: source }), { signal: AbortSignal.timeout(mqttTimeoutMs) });
          return `mqtt ${effect.target}: ${topic}`;
        } catch (e) {
          throw new DeliveryRetry(`mqtt ${effect.target}: ${(e as Error).message}`);
        }
      },
      async deliverSummary(s, window) {
        const target = publisher(s.target);
        try {
          const { topic } = await target.publishSummary(floodSummaryEvent(s, window), { signal: AbortSignal.timeout(mqttTimeoutMs) });
          return `flood summary by mqtt ${s.target}: ${topic}`;
        } catch (e) {
          throw new DeliveryRetry(`mqtt ${s.target}: ${(e as Error).message}`);
        }
      },
      async close() {
        await Promise.all([...publishers.values()].map((p) => p.close()));
      },
    };
  },
};
