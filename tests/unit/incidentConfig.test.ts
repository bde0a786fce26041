/** The `incidents`, `escalation` and `channels` configuration sections: defaults and clear errors. */
import { describe, expect, it } from 'vitest';
import { parseConfig } from '../../src/domain/configFile.ts';
import { DEFAULT_FLOOD_CONTROL } from '../../src/domain/escalationConfig.ts';

describe('incident and escalation configuration', () => {
  it('defaults to component scope, return after 2 clean samples, reopen within 3, no policies', () => {
    const c = parseConfig('');
    expect(c.incidents).toEqual({ scope: 'component', returnAfterSamples: 2, reopenWithinSamples: 3, maxShelveHours: 168 });
    expect(c.escalation.policies).toEqual([]);
    expect(c.channels).toEqual({ webhooks: [], mqtt: [], floodControl: DEFAULT_FLOOD_CONTROL });
  });

  it('accepts a complete example', () => {
    const c = parseConfig(`
incidents: { scope: measurand }
channels:
  email: { from: 'wearshift <alerts@plant.example>', smtp: { host: smtp.plant.example, port: 465, secure: true, user: alerts, passwordEnv: SMTP_PASSWORD } }
  webhooks: [{ name: ops, url: 'https://ops.plant.example/hooks/oil', secrets: [OPS_WEBHOOK_SECRET, 'whsec_MfKQ9r8GKYqrTwjUPD8ILPZIo2LaLaSw'] }]
  mqtt: [{ name: plant-bus, url: 'mqtts://broker.plant.example:8883' }]
  ackLinks: { baseUrl: 'https://oil.plant.example', secretEnv: ACK_LINK_SECRET }
escalation:
  policies:
    - name: alarms
      match: { severities: [alarm] }
      tiers:
        - { afterMinutes: 0, email: [oncall@plant.example], webhooks: [ops], mqtt: [plant-bus] }
        - { afterMinutes: 30, email: [reliability.lead@plant.example] }
      repeatMinutes: 120
`);
    expect(c.channels.mqtt[0]).toMatchObject({ topic: 'plant/{unit}/{component}/oil', qos: 1 });
    expect(c.channels.webhooks[0]!.timeoutMs).toBe(10_000);
    expect(c.channels.ackLinks!.ttlHours).toBe(72);
    expect(c.escalation.policies[0]!.match).toEqual({ severities: ['alarm'], kinds: ['machine'] });
  });

  it('names the field and the reason of every mistake', () => {
    const attempt = () =>
      parseConfig(
        `
escalation:
  policies:
    - name: p
      tiers: [{ afterMinutes: 10, email: [a@plant.example], webhooks: [nope] }, { afterMinutes: 5, mqtt: [] }]
channels:
  mqtt: [{ name: m, url: 'mqtt://broker', topic: 'plant/#/{unit}' }]
  webhooks: [{ name: w, url: 'ftp://x', secrets: [lower-case] }]
`,
        'site.yaml',
      );
    expect(attempt).toThrow(/^site\.yaml: invalid configuration/);
    const message = (() => {
      try {
        attempt();
      } catch (e) {
        return (e as Error).message;
      }
      return '';
    })();
    expect(message).toContain('escalation.policies.0.tiers.1: a tier needs at least one e-mail address, webhook or MQTT channel');
    expect(message).toContain('escalation.policies.0.tiers: tiers must be in order of afterMinutes');
    expect(message).toContain('escalation.policies.0.tiers.0.email: e-mail targets need channels.email');
    expect(message).toContain('escalation.policies.0.tiers.0.webhooks.0: no webhook named "nope" in channels.webhooks');
    expect(message).toContain('channels.mqtt.0.topic: a topic to publish to must not hold the wildcards + or #');
    expect(message).toContain('channels.webhooks.0.url');
    expect(message).toContain('channels.webhooks.0.secrets.0: expected an environment variable name');
  });

  it('refuses an MQTT topic the publisher could never send to, naming the channel and the field', () => {
    const withTopic = (topic: string) => `
channels:
  mqtt:
    - { name: plant-bus, url: 'mqtt://broker.plant.example' }
    - { name: historian, url: 'mqtt://broker.plant.example', topic: ${JSON.stringify(topic)} }
`;
    const refusal = (topic: string) => {
      try {
        parseConfig(withTopic(topic), 'site.yaml');
      } catch (e) {
        return (e as Error).message;
      }
      return 'accepted';
    };
    // MQTT 3.1.1 §4.7.2: topics starting with "$" are the broker's.
    expect(refusal('$SYS/wearshift/{unit}')).toContain('channels.mqtt.1.topic: MQTT channel "historian": the topic "$SYS/wearshift/{unit}" starts with "$"');
    expect(refusal('$plant/{unit}/{component}')).toMatch(/^site\.yaml: invalid configuration/);
    // §1.5.3: no NUL in a topic.
    expect(refusal('plant/\u0000/{unit}')).toContain('channels.mqtt.1.topic: MQTT channel "historian": the topic holds a NUL character');
    // A "$" after the first character, and a unit name starting with one (percent-encoded when filled in), are fine.
    expect(refusal('plant/$meters/{unit}')).toBe('accepted');
    expect(refusal('{unit}/{component}/oil')).toBe('accepted');
  });
});
