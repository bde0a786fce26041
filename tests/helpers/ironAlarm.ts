/** An incident opened straight through the incident store, for tests of what the channels and workers do with it. */
import type { Step } from '../../src/analysis/model.ts';
import type { RedisIncidents } from '../../src/redis/redisIncidents.ts';

/** Opens an iron alarm (95 ppm against 80) on the unit's gearbox, sampled a day ago; a worker's outbox relay queues its message. */
export async function openIronAlarm(incidents: RedisIncidents, unit: string): Promise<void> {
  const sampledAt = new Date(Date.now() - 86_400_000).toISOString();
  const finding: Step['findings'][number] = {
    unit,
    component: 'gearbox',
    group: 'gearboxes',
    measurand: 'Fe',
    rule: 'limit',
    disposition: 'incident',
    severity: 'alarm',
    value: 95,
    threshold: 80,
    basis: 'reading',
    sampleId: `${unit}-1`,
    sampledAt,
    explanation: 'Fe 95 ppm is above the alarm level of 80 ppm.',
  };
  await incidents.applySteps({ unit, component: 'gearbox' }, [{ sampleId: `${unit}-1`, sampledAt, findings: [finding] }], {
    group: 'gearboxes',
    now: new Date(),
    quietBefore: new Date(0),
  });
}
