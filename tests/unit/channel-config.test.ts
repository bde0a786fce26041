/** Channel settings the configuration refuses because they would not do what they say. */
import { describe, expect, it } from 'vitest';
import { parseConfig } from '../../src/domain/configFile.ts';

describe('channel configuration', () => {
  it('refuses MQTT QoS 0, which may lose an alarm, and keeps 1 and 2 as given', () => {
    const mqtt = (qos: number) => `channels:\n  mqtt: [ { name: plant-bus, url: "mqtt://broker.plant.example", qos: ${qos} } ]\n`;
    expect(() => parseConfig(mqtt(0))).toThrow('channels.mqtt.0.qos: qos is 1 (at least once) or 2 (exactly once); 0 is refused, as it may lose an alarm');
    expect(parseConfig(mqtt(1)).channels.mqtt[0]!.qos).toBe(1);
    expect(parseConfig(mqtt(2)).channels.mqtt[0]!.qos).toBe(2);
    expect(parseConfig('channels:\n  mqtt: [ { name: plant-bus, url: "mqtt://broker.plant.example" } ]\n').channels.mqtt[0]!.qos).toBe(1);
  });

  it('refuses an SMTP password without a user name, which would never be sent', () => {
    const smtp = (extra: string) => `channels:\n  email: { from: "wearshift <alerts@plant.example>", smtp: { host: smtp.plant.example${extra} } }\n`;
    expect(() => parseConfig(smtp(', passwordEnv: SMTP_PASSWORD'))).toThrow('channels.email.smtp.user: passwordEnv needs user: SMTP authentication sends the password only with a user name');
    expect(parseConfig(smtp(', user: alerts, passwordEnv: SMTP_PASSWORD')).channels.email!.smtp).toMatchObject({ user: 'alerts', passwordEnv: 'SMTP_PASSWORD' });
    expect(parseConfig(smtp('')).channels.email!.smtp.passwordEnv).toBeUndefined();
  });
});
