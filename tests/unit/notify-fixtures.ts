/** An invented incident message (demo fleet naming) shared by the notification tests. */
import { ADVISORY_CAUTION } from '../../src/domain/caution.ts';
import type { IncidentMessage } from '../../src/notify/message.ts';

export function incidentMessage(overrides: Partial<IncidentMessage> = {}, incident: Partial<IncidentMessage['incident']> = {}): IncidentMessage {
  return {
    type: 'opened',
    incident: {
      id: 'INC-2026-0007',
      unit: 'PS2-P3',
      component: 'gearbox',
      group: 'pump-gearboxes',
      severity: 'caution',
      peakSeverity: 'caution',
      state: 'active, unacknowledged',
      openedAt: '2026-03-01T08:00:00Z',
      tier: 0,
      url: 'https://wearshift.plant.example/incidents/INC-2026-0007',
      apiUrl: 'https://wearshift.plant.example/v1/incidents/INC-2026-0007',
      ...incident,
    },
    findings: [
      {
        measurand: 'Fe',
        subject: 'Fe',
        rule: 'cusum',
        severity: 'caution',
        value: 5.6123,
        threshold: 5,
        basis: 'cusum',
        sampleId: 'LAB-0042',
        sampledAt: '2026-03-01T08:00:00Z',
        explanation: 'Fe wear rate rose from about 2 to 4.5 ppm per 100 h over the last three samples.',
      },
      {
        measurand: 'Fe',
        subject: 'Fe',
        rule: 'rate',
        severity: 'watch',
        value: 4.5,
        basis: 'rate',
        sampleId: 'LAB-0042',
        sampledAt: '2026-03-01T08:00:00Z',
        explanation: 'Fe wear rate 4.5 ppm per 100 h.',
      },
    ],
    advisoryFindings: [],
    recentResults: [
      { sampleId: 'LAB-0038', sampledAt: '2026-01-05T08:00:00Z', oilHours: 250, readings: { Fe: '12', Cu: '3', Si: '<1' } },
      { sampleId: 'LAB-0040', sampledAt: '2026-02-02T08:00:00Z', oilHours: 500, readings: { Fe: '17', Cu: '3', Si: '2' } },
      { sampleId: 'LAB-0042', sampledAt: '2026-03-01T08:00:00Z', oilHours: 750, readings: { Fe: '28', Cu: '4', Si: '2' } },
    ],
    whatChanged: 'Fe wear rate shifted up (CUSUM 5.6 above its limit 5.0) since LAB-0042.',
    idempotencyKey: 'INC-2026-0007:opened:1',
    advisory: ADVISORY_CAUTION,
    ...overrides,
  };
}
