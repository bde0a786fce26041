import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { checkTopicTemplate, incidentTopic, topicLevelText } from '../../src/channels/mqtt/mqttTopic.ts';
import { incidentMessage } from './notify-fixtures.ts';

describe('MQTT topic from a template', () => {
  it('fills the default-style template', () => {
    expect(incidentTopic('plant/{unit}/{component}/oil', incidentMessage())).toBe('plant/PS2-P3/gearbox/oil');
  });

  it('keeps every name inside its own level and free of wildcards', () => {
    // MQTT 3.1.1 §4.7.1: "/" separates levels, "+" and "#" are wildcards; §1.5.3: no U+0000.
    const topic = incidentTopic('plant/{unit}/{component}/oil', incidentMessage({}, { unit: 'Line 2/P+3#a\u0000b%', component: '$SYS' }));
    expect(topic).toBe('plant/Line 2%2FP%2B3%23a%00b%25/$SYS/oil');
    expect(topic.split('/')).toHaveLength(4);
    expect(incidentTopic('{component}/{unit}', incidentMessage({}, { component: '$SYS' }))).toBe('%24SYS/PS2-P3');
  });

  it('is reversible, so two different names never share a topic level', () => {
    fc.assert(
      fc.property(fc.string({ unit: 'binary' }), (name) => {
        const level = topicLevelText(name);
        expect(level).not.toMatch(/[/+#\p{Cc}]/u);
        expect(decodeURIComponent(level)).toBe(name);
      }),
      { numRuns: 500 },
    );
  });

  it('refuses templates that cannot be published to', () => {
    expect(() => checkTopicTemplate('plant/+/{unit}')).toThrow(/"\+", "#" and NUL/);
    expect(() => checkTopicTemplate('plant/{unit}/#')).toThrow(/"\+", "#" and NUL/);
    expect(() => checkTopicTemplate('$SYS/{unit}')).toThrow(/reserved/);
    expect(() => checkTopicTemplate('plant/{site}')).toThrow(/unknown placeholder \{site\}/);
    expect(() => checkTopicTemplate('')).toThrow(/empty/);
  });
});
