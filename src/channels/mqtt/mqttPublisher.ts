/**
 * Publishes incident CloudEvents to an MQTT broker with QoS 1, for plant messaging (SCADA gateways, historians).
 *
 * Messages published while the broker is unreachable wait in mqtt.js' outgoing store and are sent after
 * reconnecting; `publish` resolves only when the broker's PUBACK has arrived. A fixed client id with
 * `clean: false` asks the broker to keep our session (its in-flight state for us) across reconnects.
 * The outgoing store lives in memory: what has not been acknowledged when the process ends is not sent, so the
 * queue must treat a publish as done only when its promise resolves.
 *
 * A caller that stopped waiting (its signal aborted) leaves the message in the outgoing store, where it still goes
 * out once the broker is back. A retry of the same message (the same CloudEvent id) while that publish is pending
 * waits for it instead of queueing a copy: however many attempts a broker outage takes, the broker gets the message
 * once from this client.
 */
import { connect, type IClientOptions, type IClientPublishOptions, type MqttClient } from 'mqtt';
import type { IncidentCloudEvent } from '../../notify/cloudEvent.ts';
import { checkTopicTemplate, DEFAULT_TOPIC_TEMPLATE, incidentTopic } from './mqttTopic.ts';

export interface MqttPublisherOptions {
  /** Broker URL: `mqtt://host:1883`, `mqtts://host:8883`, `ws://...`. */
  url: string;
  /** Fixed across restarts, so that the broker finds our session again. */
  clientId: string;
  /** Placeholders {unit} {component} {group} {severity} {type}. Default `plant/{unit}/{component}/oil`. */
  topicTemplate?: string;
  username?: string;
  password?: string;
  /** Default 1 (at least once; receivers de-duplicate on the CloudEvent id). */
  qos?: 1 | 2;
  /** Keep the last event per topic on the broker for late subscribers. Default false. */
  retain?: boolean;
  /** 4 = MQTT 3.1.1, 5 = MQTT 5 (adds the content type to each message). Default 4. */
  protocolVersion?: 4 | 5;
  /** Pause between reconnection attempts. Default 1000 ms. */
  reconnectPeriodMs?: number;
  /** Give up one connection attempt after this long. Default 30 000 ms. */
  connectTimeoutMs?: number;
  /** Default 60 s. */
  keepaliveSeconds?: number;
  /** TLS material for mqtts:// and wss://, passed to mqtt.js. */
  tls?: Pick<IClientOptions, 'ca' | 'cert' | 'key' | 'rejectUnauthorized' | 'servername'>;
  /** Connection errors; the client keeps reconnecting after each. Default: ignored. */
  onError?: (error: Error) => void;
  /**
   * How long `close()` waits for the broker to acknowledge what is in flight before it drops it and closes anyway: a
   * broker that accepts messages but never acknowledges them would otherwise hold a shutdown for ever. Default 5 000 ms.
   */
  closeGraceMs?: number;
}

export const DEFAULT_MQTT_CLOSE_GRACE_MS = 5_000;

export interface MqttPublisher {
  /** Resolves with the topic once the broker has acknowledged the message; rejects when `signal` aborts first. */
  publish(event: IncidentCloudEvent, options?: { signal?: AbortSignal }): Promise<{ topic: string }>;
  /**
   * Publishes an alarm-flood summary (src/notify/floodControl.ts) on the channel's topic template filled with
   * unit "wearshift", component "flood-summary", group "all", type "flood-summary" and the highest held severity.
   */
  publishSummary(event: { id: string; data: { held: readonly { severity: string }[] } }, options?: { signal?: AbortSignal }): Promise<{ topic: string }>;
  readonly connected: boolean;
  /** Waits for in-flight messages when connected, at most `closeGraceMs`; `force` drops them at once. */
  close(options?: { force?: boolean }): Promise<void>;
}

export function createMqttPublisher(options: MqttPublisherOptions): MqttPublisher {
  const template = options.topicTemplate ?? DEFAULT_TOPIC_TEMPLATE;
  checkTopicTemplate(template);
  if (options.clientId === '') throw new TypeError('an MQTT publisher needs a fixed, non-empty clientId');
  const qos = options.qos ?? 1;
  const protocolVersion = options.protocolVersion ?? 4;
  const client: MqttClient = connect(options.url, {
    clientId: options.clientId,
    clean: false,
    protocolVersion,
    reconnectPeriod: options.reconnectPeriodMs ?? 1000,
    connectTimeout: options.connectTimeoutMs ?? 30_000,
    keepalive: options.keepaliveSeconds ?? 60,
    queueQoSZero: false,
    ...(options.username !== undefined && { username: options.username }),
    ...(options.password !== undefined && { password: options.password }),
    ...options.tls,
  });
  // Without a listener an 'error' event would end the process; a refused connection is routine here.
  client.on('error', (e) => options.onError?.(e));
  /** Publishes waiting for their PUBACK, by CloudEvent id. */
  const pending = new Map<string, Promise<unknown>>();

  return {
    get connected() {
      return client.connected;
    },
    async publish(event, publishOptions) {
      return send(incidentTopic(template, event.data), event, publishOptions);
    },
    async publishSummary(event, publishOptions) {
      const severities = event.data.held.map((h) => h.severity);
      const severity = ['alarm', 'caution', 'watch'].find((s) => severities.includes(s)) ?? 'watch';
      const pseudo = { type: 'flood-summary', incident: { unit: 'wearshift', component: 'flood-summary', group: 'all', severity } } as unknown as IncidentCloudEvent['data'];
      return send(incidentTopic(template, pseudo), event, publishOptions);
    },
    async close(closeOptions) {
      if (closeOptions?.force === true) {
        await client.endAsync(true);
        return;
      }
      // Waits for the broker's acknowledgements itself (mqtt.js's own graceful end waits for ever and cannot be forced
      // once begun). Unacknowledged messages are not lost by dropping them: their notify jobs are not done and run again.
      const inFlight = (): boolean => Object.keys(client.outgoing).length > 0;
      if (inFlight()) {
        let timer: NodeJS.Timeout | undefined;
        let onEmpty: (() => void) | undefined;
        await new Promise<void>((resolve) => {
          onEmpty = resolve;
          client.once('outgoingEmpty', onEmpty);
          timer = setTimeout(resolve, options.closeGraceMs ?? DEFAULT_MQTT_CLOSE_GRACE_MS);
        });
        clearTimeout(timer);
        client.removeListener('outgoingEmpty', onEmpty!);
      }
      await client.endAsync(inFlight());
    },
  };

  /** The pending publish of the event, or a new one: never a second copy in the outgoing store. */
  function publishOnce(topic: string, event: { id: string }): Promise<unknown> {
    const waiting = pending.get(event.id);
    if (waiting !== undefined) return waiting;
    const publishOpts: IClientPublishOptions = {
      qos,
      retain: options.retain ?? false,
      ...(protocolVersion === 5 && { properties: { contentType: 'application/cloudevents+json; charset=utf-8' } }),
    };
    const acknowledged = client.publishAsync(topic, JSON.stringify(event), publishOpts).finally(() => {
      if (pending.get(event.id) === acknowledged) pending.delete(event.id);
    });
    pending.set(event.id, acknowledged);
    return acknowledged;
  }

  async function send(topic: string, event: { id: string }, publishOptions: { signal?: AbortSignal } | undefined): Promise<{ topic: string }> {
    const signal = publishOptions?.signal;
    signal?.throwIfAborted();
    const acknowledged = publishOnce(topic, event);
    if (signal === undefined) {
      await acknowledged;
    } else {
      let onAbort: (() => void) | undefined;
      const aborted = new Promise<never>((_, reject) => {
        onAbort = () => reject(signal.reason instanceof Error ? signal.reason : new Error('MQTT publish aborted'));
        signal.addEventListener('abort', onAbort, { once: true });
      });
      try {
        await Promise.race([acknowledged, aborted]);
      } finally {
        if (onAbort) signal.removeEventListener('abort', onAbort);
        // The message stays in the outgoing store and still goes out; a retry of it waits for this publish.
        acknowledged.catch(() => undefined);
      }
    }
    return { topic };
  }
}
