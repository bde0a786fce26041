/**
 * `channels.webhooks[].source` and `channels.mqtt[].source`: the CloudEvents source template of a channel, with the
 * built-in default, refused when the configuration is read if it names an unknown placeholder or would not give a
 * URI reference.
 */
import { describe, expect, it } from 'vitest';
import { parseConfig } from '../../src/domain/configFile.ts';
import { sourceTemplateProblem } from '../../src/domain/addressTemplate.ts';
import { DEFAULT_SOURCE_TEMPLATE, toCloudEvent } from '../../src/notify/cloudEvent.ts';
import { incidentMessage } from './notify-fixtures.ts';

const yamlString = (s: string) => JSON.stringify(s);

/** Two webhooks and two MQTT channels; the second of each gets `source` when given. */
const withSource = (webhook?: string, mqtt?: string) => `
channels:
  webhooks:
    - { name: ops, url: 'https://ops.plant.example/hooks/oil', secrets: [OPS_WEBHOOK_SECRET] }
    - { name: north-site, url: 'https://north.plant.example/hooks', secrets: [NORTH_WEBHOOK_SECRET]${webhook === undefined ? '' : `, source: ${yamlString(webhook)}`} }
  mqtt:
    - { name: plant-bus, url: 'mqtt://broker.plant.example' }
    - { name: north-bus, url: 'mqtt://broker.plant.example'${mqtt === undefined ? '' : `, source: ${yamlString(mqtt)}`} }
`;

function refusal(text: string): string {
  try {
    parseConfig(text, 'site.yaml');
  } catch (e) {
    return (e as Error).message;
  }
  return 'accepted';
}

describe('the CloudEvents source of a channel', () => {
  it('defaults to /wearshift/{unit}/{component}, which gives exactly the source toCloudEvent gives without one', () => {
    const channels = parseConfig(withSource()).channels;
    expect(channels.webhooks.map((w) => w.source)).toEqual([DEFAULT_SOURCE_TEMPLATE, DEFAULT_SOURCE_TEMPLATE]);
    expect(channels.mqtt.map((m) => m.source)).toEqual([DEFAULT_SOURCE_TEMPLATE, DEFAULT_SOURCE_TEMPLATE]);
    expect(DEFAULT_SOURCE_TEMPLATE).toBe('/wearshift/{unit}/{component}');
    const msg = incidentMessage({}, { unit: 'Line 2/P3' });
    const configured = JSON.stringify(toCloudEvent(msg, { time: '2026-03-01T08:05:00Z', sourceTemplate: channels.webhooks[0]!.source }));
    expect(configured).toBe(JSON.stringify(toCloudEvent(msg, { time: '2026-03-01T08:05:00Z' })));
    expect(JSON.parse(configured)).toMatchObject({ source: '/wearshift/Line%202%2FP3/gearbox' });
  });

  it('takes a URI reference with any of the placeholders, as given', () => {
    for (const template of [
      '/plant-north/{unit}/{component}',
      'urn:plant-north:{group}:{unit}',
      'https://events.plant-north.example/oil/{unit}/{component}?severity={severity}#{type}',
      'tag:plant-north.example,2026:{unit}',
      './{group}/{unit}',
      '/plant-north',
    ]) {
      const channels = parseConfig(withSource(template, template)).channels;
      expect(channels.webhooks[1]!.source, template).toBe(template);
      expect(channels.mqtt[1]!.source, template).toBe(template);
    }
  });

  it('refuses an unknown placeholder when the configuration is read, naming the channel’s field and the known ones', () => {
    const message = refusal(withSource('/plant-north/{site}/{unit}'));
    expect(message).toMatch(/^site\.yaml: invalid configuration/);
    expect(message).toContain(
      'channels.webhooks.1.source: the CloudEvents source template "/plant-north/{site}/{unit}" names an unknown placeholder {site}; known: {unit} {component} {group} {severity} {type}',
    );
    expect(message).not.toContain('channels.webhooks.0');
    expect(message).not.toContain('channels.mqtt');
    expect(refusal(withSource(undefined, 'urn:x:{Unit}:{}'))).toContain('channels.mqtt.1.source: the CloudEvents source template "urn:x:{Unit}:{}" names unknown placeholders {Unit} {}');
  });

  it('refuses a template that would not give a URI reference, saying why', () => {
    const cases: Array<[string, string]> = [
      ['', 'is empty: a CloudEvent needs a source'],
      ['/plant north/{unit}', 'holds " ", which a URI reference does not allow; write it percent-encoded (%20)'],
      ['/werk/süd/{unit}', 'holds "ü", which a URI reference does not allow; write it percent-encoded (%C3%BC)'],
      ['/plant/{unit', 'holds a "{" or "}" that does not enclose a placeholder'],
      ['/plant/%zz/{unit}', 'holds a "%" that does not start a percent-encoding such as %20'],
      ['{unit}:{component}', 'is not a URI reference: what comes before the first ":" must be a scheme'],
      ['2plant:{unit}', 'is not a URI reference: what comes before the first ":" must be a scheme'],
      ['https://events.plant.example:{unit}/oil', 'is not a URI reference: the port after the host must be digits'],
      ['https://[{unit}]/oil', 'is not a URI reference: the host after "//" holds a character it may not'],
      ['/plant/[{unit}]', 'is not a URI reference: "[", "]" or "#" where a path may not hold them'],
      ['/plant/{unit}#a#b', 'is not a URI reference: "[", "]" or a second "#" in the fragment'],
    ];
    for (const [template, why] of cases) {
      expect(sourceTemplateProblem(template), template).toContain(why);
      expect(refusal(withSource(template)), template).toContain(`channels.webhooks.1.source: the CloudEvents source template ${JSON.stringify(template)} ${why}`);
      expect(refusal(withSource(undefined, template)), template).toContain(`channels.mqtt.1.source: the CloudEvents source template ${JSON.stringify(template)} ${why}`);
    }
  });

  it('gives a URI reference for whatever names fill an accepted template', () => {
    // Names with characters that mean something in a URI: each is percent-encoded, so the structure stays.
    const msg = incidentMessage({ type: 'escalated' }, { unit: 'Line 2/P#3?a=b', component: 'gear:box [main]', group: 'pumps & fans' });
    const event = toCloudEvent(msg, { time: '2026-03-01T08:05:00Z', sourceTemplate: 'https://events.plant-north.example/{group}/{unit}?c={component}#{type}' });
    expect(event.source).toBe('https://events.plant-north.example/pumps%20%26%20fans/Line%202%2FP%233%3Fa%3Db?c=gear%3Abox%20%5Bmain%5D#escalated');
    const url = new URL(event.source);
    expect([url.pathname, url.search, url.hash]).toEqual(['/pumps%20%26%20fans/Line%202%2FP%233%3Fa%3Db', '?c=gear%3Abox%20%5Bmain%5D', '#escalated']);
  });
});
