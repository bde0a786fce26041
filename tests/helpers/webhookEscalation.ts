/**
 * What the notify tests share: a configuration that escalates gearbox incidents through tiers of webhooks on a local
 * receiver, and the iron alarm finding that opens such an incident.
 */
import type { Step } from '../../src/analysis/model.ts';
import type { Config } from '../../src/domain/config.ts';
import { parseConfig } from '../../src/domain/configFile.ts';
import type { IncidentEffect } from '../../src/incidents/model.ts';
import type { RedisIncidents } from '../../src/redis/redisIncidents.ts';

export interface ReceiverEndpoint {
  readonly name: string;
  /** Milliseconds the delivery waits for an answer; the channel's default when absent. */
  readonly timeoutMs?: number;
}

/** Tier n names the webhooks of `tiers[n]`, each posting to `http://127.0.0.1:<port>/<name>` signed with `secret`. */
export function webhookEscalationConfig(prefix: string, port: number, secret: string, tiers: readonly (readonly string[])[], endpoints: readonly ReceiverEndpoint[]): Config {
  const tierLines = tiers.map((hooks) => `        - { afterMinutes: 0, webhooks: [${hooks.join(', ')}] }`).join('\n');
  const hookLines = endpoints
    .map((e) => `    - { name: ${e.name}, url: "http://127.0.0.1:${port}/${e.name}", secrets: ["${secret}"]${e.timeoutMs === undefined ? '' : `, timeoutMs: ${e.timeoutMs}`} }`)
    .join('\n');
  return parseConfig(`
redis: { prefix: "${prefix}" }
escalation:
  policies:
    - name: gearbox-on-call
      tiers:
${tierLines}
channels:
  webhooks:
${hookLines}
`);
}

/** A gearbox's iron above its alarm level: a finding that opens an incident. */
export function gearboxIronAlarm(unit: string, sampleId: string, sampledAt: string): Step['findings'][number] {
  return { unit, component: 'gearbox', group: 'gearboxes', measurand: 'Fe', rule: 'limit', disposition: 'incident', severity: 'alarm', value: 95, threshold: 80, basis: 'reading', sampleId, sampledAt, explanation: 'Fe 95 ppm is above the alarm level of 80 ppm.' };
}

/** Opens an iron alarm incident on each unit's gearbox (sampled a day ago) and returns the messages it queued, held back from the queue. */
export async function openIronAlarms(incidents: RedisIncidents, units: readonly string[]): Promise<IncidentEffect[]> {
  const sampledAt = new Date(Date.now() - 86_400_000).toISOString();
  for (const unit of units) {
    await incidents.applySteps({ unit, component: 'gearbox' }, [{ sampleId: `${unit}-1`, sampledAt, findings: [gearboxIronAlarm(unit, `${unit}-1`, sampledAt)] }], {
      group: 'gearboxes',
      now: new Date(),
      quietBefore: new Date(0),
    });
  }
  const held: IncidentEffect[] = [];
  await incidents.drainOutbox(async (effects) => {
    held.push(...effects);
  });
  return held;
}
