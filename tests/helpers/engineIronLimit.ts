/**
 * An invented dump-truck engine with a site limit on iron (caution 50, alarm 100 ppm) and a webhook tier told at once:
 * the fixture of the tests of incidents whose evidence a lab correction takes away.
 */
import { parseConfig } from '../../src/domain/configFile.ts';
import type { ResultEvent } from '../../src/domain/event.ts';

export const CONFIG = parseConfig(`
channels:
  webhooks: [{ name: ops, url: "https://ops.example/hooks", secrets: [WEBHOOK_SECRET] }]
escalation:
  policies: [{ name: all, tiers: [{ afterMinutes: 0, webhooks: [ops] }] }]
groups:
  - name: dump-trucks
    match: { component: engine }
    limits: { Fe: { caution: 50, alarm: 100 } }
`);
export const NOW = Date.parse('2026-05-04T09:00:00Z');
export const REF = { unit: 'D-16', component: 'engine' };
/** A result of the engine sampled on 2026-05-0`day`, 08:00 UTC, with one iron reading. */
export const result = (sampleId: string, day: number, fe: number, revision = 0): ResultEvent => ({ ...REF, sampleId, revision, sampledAt: `2026-05-0${day}T08:00:00Z`, readings: { Fe: fe } });
