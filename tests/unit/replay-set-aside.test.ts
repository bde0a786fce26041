/**
 * Replay tells an incident closed because its evidence was set aside (a lab correction took its finding away: closed
 * `withdrawn`) with no severity standing, as the e-mail, webhook, live and OPC UA views do: `incidentSeverity` "none"
 * on the lines from its closing on, and the severity last told as `lastAnnouncedSeverity`.
 *
 * Invented history: one gearbox with a site limit on iron (caution 45 ppm); its second sample reads 60 ppm, and the
 * lab corrects it to 12 ppm.
 */
import { describe, expect, it } from 'vitest';
import { parseConfig } from '../../src/domain/configFile.ts';
import { replayRecords, type IncidentLine } from '../../src/pipeline/replay.ts';

const CONFIG = parseConfig(`
detection: { measurands: [] }
population: { peers: { enabled: false } }
defaults: { limits: { Fe: { caution: 45, alarm: 90 } } }
`);
const NOW = Date.parse('2026-01-01T00:00:00Z');

const sample = (n: number, fe: number, revision = 0) => ({
  sampleId: `GB7-${n}`,
  revision,
  unit: 'GB7',
  component: 'gearbox',
  sampledAt: new Date(Date.UTC(2025, n, 10, 8)).toISOString(),
  unitHours: 1000 + 300 * n,
  oilHours: 300 * n,
  readings: { Fe: fe },
});

describe('replay of an incident whose evidence a correction took away', () => {
  it('gives no severity as standing from its closing on, and the one last told beside it', async () => {
    const records = [sample(1, 10), sample(2, 60), sample(3, 14), sample(2, 12, 1)];
    const outcome = await replayRecords(
      records.map((record, i) => ({ line: i + 1, record })),
      { config: CONFIG, now: NOW },
    );
    const lines = outcome.timeline.filter((l): l is IncidentLine => l.type === 'incident');
    const opened = lines.find((l) => l.change === 'opened');
    expect(opened?.incidentSeverity).toBe('caution');
    const closing = lines.find((l) => l.change === 'closed');
    expect(closing).toMatchObject({ incidentSeverity: 'none', lastAnnouncedSeverity: 'caution', incidentState: 'closed' });
    // Every line of that incident from its closing on says the same.
    const after = lines.filter((l) => l.incidentId === closing!.incidentId && l.incidentState === 'closed');
    expect(after.length).toBeGreaterThan(0);
    for (const l of after) expect(l).toMatchObject({ incidentSeverity: 'none', lastAnnouncedSeverity: 'caution' });
    // An incident that returned and closed on its own keeps its severity (nothing was set aside).
    expect(lines.filter((l) => l.incidentState !== 'closed').every((l) => l.incidentSeverity !== 'none')).toBe(true);
  });
});
