/**
 * A channel secret that is missing or cannot be used is found when the worker opens its channels, not by the first
 * alarm (whose message could then not go out): each problem names who needs the secret, the environment variable
 * and the reason. The configuration refuses a literal webhook secret that could not sign.
 */
import { randomBytes } from 'node:crypto';
import { describe, expect, it } from 'vitest';
import { notificationChannels } from '../../src/channels/openChannels.ts';
import { channelSecretProblems, channelSecretRefs, checkAckLinkSecret } from '../../src/channels/registry.ts';
import { parseConfig } from '../../src/domain/configFile.ts';
import { InputError } from '../../src/domain/errors.ts';
import { silentLogger } from '../../src/telemetry/logger.ts';

const CONFIG = parseConfig(`
channels:
  email:
    from: "wearshift <alerts@plant.example>"
    smtp: { host: 127.0.0.1, user: alerts, passwordEnv: SMTP_PASSWORD }
  webhooks:
    - { name: control-room, url: "http://127.0.0.1:9000/hook", secrets: [CONTROL_ROOM_SECRET, "whsec_${Buffer.alloc(32, 3).toString('base64')}"] }
  mqtt:
    - { name: plant-bus, url: "mqtt://127.0.0.1:1883", username: wearshift, passwordEnv: MQTT_PASSWORD }
  ackLinks: { baseUrl: "https://wearshift.plant.example", secretEnv: ACK_LINK_SECRET }
`);

const GOOD = {
  SMTP_PASSWORD: 'smtp-password',
  CONTROL_ROOM_SECRET: `whsec_${randomBytes(32).toString('base64')}`,
  MQTT_PASSWORD: 'mqtt-password',
  ACK_LINK_SECRET: 'a-link-secret-of-32-characters-x',
};

describe('channel secrets, checked when the worker opens its channels', () => {
  it('opens the channels when every secret will do', async () => {
    expect(channelSecretProblems(CONFIG.channels, GOOD)).toEqual([]);
    const channels = notificationChannels(CONFIG.channels, { logger: silentLogger(), env: GOOD });
    await channels.close();
  });

  it('refuses with every problem at once, each naming who needs the secret, the variable and the reason', () => {
    const env = { ...GOOD, SMTP_PASSWORD: '', CONTROL_ROOM_SECRET: 'whsec_AAAA', ACK_LINK_SECRET: 'too-short' };
    delete (env as Record<string, string | undefined>).MQTT_PASSWORD;
    const error = (() => {
      try {
        notificationChannels(CONFIG.channels, { logger: silentLogger(), env });
      } catch (e) {
        return e;
      }
      return undefined;
    })();
    expect(error).toBeInstanceOf(InputError);
    expect((error as Error).message.split('\n')).toEqual([
      'notification channels: secrets missing or unusable',
      '  channels.email.smtp (the SMTP password): environment variable SMTP_PASSWORD is empty',
      '  channels.ackLinks (the link-signing secret): environment variable ACK_LINK_SECRET: a secret shorter than 16 characters (shorter ones can be guessed from one captured link)',
      '  channels.webhooks "control-room": environment variable CONTROL_ROOM_SECRET: a webhook secret must hold 24 to 64 bytes, this one holds 3',
      '  channels.mqtt "plant-bus" (the broker password): environment variable MQTT_PASSWORD is not set',
    ]);
  });

  it('checks every secret of a rotation', () => {
    // Links are signed with the first and accepted with any: an old one that is too short fails the check as well.
    expect(channelSecretProblems(CONFIG.channels, { ...GOOD, ACK_LINK_SECRET: `${GOOD.ACK_LINK_SECRET},old` })).toEqual([
      'channels.ackLinks (the link-signing secret): environment variable ACK_LINK_SECRET: a secret shorter than 16 characters (shorter ones can be guessed from one captured link)',
    ]);
    expect(channelSecretProblems(CONFIG.channels, { ...GOOD, ACK_LINK_SECRET: `,${GOOD.ACK_LINK_SECRET}` })).toEqual([
      'channels.ackLinks (the link-signing secret): environment variable ACK_LINK_SECRET: the first secret (the one links are signed with) is empty',
    ]);
    expect(channelSecretProblems(CONFIG.channels, { ...GOOD, CONTROL_ROOM_SECRET: 'not-a-whsec-secret' })).toEqual([
      'channels.webhooks "control-room": environment variable CONTROL_ROOM_SECRET: a webhook secret must look like "whsec_<base64>"',
    ]);
  });

  it('checks only the channels that are configured', () => {
    const webhookOnly = parseConfig(`
channels:
  webhooks: [ { name: control-room, url: "http://127.0.0.1:9000/hook", secrets: [CONTROL_ROOM_SECRET] } ]
  ackLinks: { baseUrl: "https://wearshift.plant.example", secretEnv: ACK_LINK_SECRET }
`);
    // No e-mail channel: the link secret is the API's business, not the worker's.
    expect(channelSecretProblems(webhookOnly.channels, { CONTROL_ROOM_SECRET: GOOD.CONTROL_ROOM_SECRET })).toEqual([]);
    expect(channelSecretRefs(webhookOnly.channels)).toEqual(['CONTROL_ROOM_SECRET']);
  });
});

describe('the acknowledgement-link secret, checked when the API starts', () => {
  it('is needed whenever channels.ackLinks is configured, with or without an e-mail channel', () => {
    const linksOnly = parseConfig(`
channels:
  ackLinks: { baseUrl: "https://wearshift.plant.example", secretEnv: ACK_LINK_SECRET }
`);
    const refused = (env: NodeJS.ProcessEnv) => {
      try {
        checkAckLinkSecret(linksOnly.channels, env);
      } catch (e) {
        expect(e).toBeInstanceOf(InputError);
        return (e as Error).message.split('\n');
      }
      return [];
    };
    const header = 'acknowledgement links: the secret is missing or unusable (the API serves the acknowledgement pages while channels.ackLinks is configured)';
    expect(refused({})).toEqual([header, '  channels.ackLinks (the link-signing secret): environment variable ACK_LINK_SECRET is not set']);
    expect(refused({ ACK_LINK_SECRET: `,${GOOD.ACK_LINK_SECRET}` })).toEqual([header, '  channels.ackLinks (the link-signing secret): environment variable ACK_LINK_SECRET: the first secret (the one links are signed with) is empty']);
    expect(refused({ ACK_LINK_SECRET: GOOD.ACK_LINK_SECRET })).toEqual([]);
    expect(refused({ ACK_LINK_SECRET: `${GOOD.ACK_LINK_SECRET}, ${GOOD.ACK_LINK_SECRET.toUpperCase()}` })).toEqual([]);
    // Without channels.ackLinks the API serves no pages and needs no secret.
    expect(() => checkAckLinkSecret(parseConfig('').channels, {})).not.toThrow();
  });
});

describe('a literal webhook secret in the configuration', () => {
  it('is refused unless it holds a key of 24 to 64 bytes', () => {
    const config = (secret: string) => `channels:\n  webhooks: [ { name: w, url: "https://hooks.plant.example/x", secrets: ["${secret}"] } ]\n`;
    expect(() => parseConfig(config('whsec_AAAA'))).toThrow(/channels\.webhooks\.0\.secrets\.0: a webhook secret must hold 24 to 64 bytes, this one holds 3 \(make one with: echo "whsec_\$\(openssl rand -base64 32\)"\)/);
    expect(() => parseConfig(config(`whsec_${Buffer.alloc(65).toString('base64')}`))).toThrow(/this one holds 65/);
    expect(() => parseConfig(config('whsec_not*base64'))).toThrow(/must be base64 after "whsec_"/);
    expect(parseConfig(config(`whsec_${Buffer.alloc(24, 9).toString('base64')}`)).channels.webhooks[0]!.secrets).toHaveLength(1);
    expect(parseConfig(config('ENV_NAME')).channels.webhooks[0]!.secrets).toEqual(['ENV_NAME']);
    expect(() => parseConfig(config('lower-case'))).toThrow(/expected an environment variable name/);
  });
});
