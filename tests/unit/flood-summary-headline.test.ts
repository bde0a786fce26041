/**
 * The alarm-flood summary's headline (src/notify/floodControl.ts) as the e-mail subject and the CloudEvent's
 * `data.headline` carry it: one incident held more than once in a window (opened, then escalated) is one incident
 * at alarm, not one per message.
 */
import { describe, expect, it } from 'vitest';
import { renderFloodSummaryEmail } from '../../src/channels/email/floodSummaryEmail.ts';
import { floodSummaryEvent, summaryHeadline, type FloodSummary, type HeldMessage } from '../../src/notify/floodControl.ts';

function held(unit: number, type: HeldMessage['type'], severity: HeldMessage['severity'], minute: number): HeldMessage {
  const id = `U${unit}/gearbox@LAB-${unit}`;
  return { incidentId: id, unit: `U${unit}`, component: 'gearbox', severity, type, url: `https://wearshift.plant.example/incidents/${encodeURIComponent(id)}`, at: `2026-03-01T08:0${minute}:00.000Z` };
}

const window = { from: '2026-03-01T08:00:00.000Z', until: '2026-03-01T08:10:00.000Z' };

/** 30 units posting alarms at once: 30 opened messages, and 10 of the incidents escalated in the same window. */
const flood: FloodSummary = {
  channel: 'email',
  target: 'oncall@plant.example',
  window,
  maxMessages: 10,
  held: [
    ...Array.from({ length: 30 }, (_, u) => held(u, 'opened', 'alarm', 1)),
    ...Array.from({ length: 10 }, (_, u) => held(u, 'escalated', 'alarm', 6)),
  ],
};

describe('alarm-flood summary headline', () => {
  it('counts the messages held back, and the distinct incidents among them at alarm', () => {
    expect(summaryHeadline(flood)).toBe('Alarm flood: 40 more incident messages on 30 components held back (30 incidents at alarm)');
  });

  it('counts an incident at alarm once even when only a later message of it is at alarm', () => {
    const summary: FloodSummary = { ...flood, held: [held(1, 'opened', 'caution', 1), held(1, 'escalated', 'alarm', 5), held(2, 'opened', 'watch', 2)] };
    expect(summaryHeadline(summary)).toBe('Alarm flood: 3 more incident messages on 2 components held back (1 incident at alarm)');
  });

  it('names no alarm when none is held', () => {
    const summary: FloodSummary = { ...flood, held: [held(1, 'opened', 'caution', 1)] };
    expect(summaryHeadline(summary)).toBe('Alarm flood: 1 more incident message on 1 component held back');
  });

  it('is what the e-mail subject and the webhook/MQTT event say, beside the caution', () => {
    const mail = renderFloodSummaryEmail(flood, { from: 'wearshift@plant.example', to: flood.target });
    expect(mail.subject).toBe('[wearshift] Alarm flood: 40 more incident messages on 30 components held back (30 incidents at alarm)');
    expect(mail.text.split('\n')[0]).toBe(summaryHeadline(flood));
    const event = floodSummaryEvent({ ...flood, channel: 'webhook', target: 'scada' }, 1);
    expect(event.data.headline).toBe('Alarm flood: 40 more incident messages on 30 components held back (30 incidents at alarm)');
    expect(event.data.advisory).toMatch(/wearshift advises/);
  });
});
