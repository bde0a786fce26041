/**
 * The demo tells the same story whatever day it runs: its calendar moves by whole months (each date keeping its place
 * within its month), and its headline counts the first finding that opened or escalated an incident, not an advisory.
 * The group's statistics go by calendar month, so before this the story changed with the day of the run (on
 * 3 December 2026 four incidents and "caught 8 samples early", on 21 December five and 7).
 */
import { describe, expect, it } from 'vitest';
import { demoFleet } from '../../src/demo/fleet.ts';
import { planFeed, shiftByMonths } from '../../src/demo/feedPlan.ts';
import { componentTimeline, formatTimeline } from '../../src/demo/timeline.ts';
import type { Finding } from '../../src/domain/finding.ts';
import { monthOf } from '../../src/pipeline/groupShares.ts';
import { replayRecords } from '../../src/pipeline/replay.ts';
import { loadConfig } from '../../src/runtime/loadConfig.ts';

const DAY_MS = 86_400_000;

describe('shiftByMonths', () => {
  it('keeps the share of the month that had passed (worked by hand)', () => {
    // Noon of 16 January is 15.5 of 31 days, half way through January; half of February (28 days) is 15 February 00:00.
    expect(new Date(shiftByMonths(Date.UTC(2025, 0, 16, 12), 1)).toISOString()).toBe('2025-02-15T00:00:00.000Z');
    // The first instant of a month stays the first instant; 31 December 2025 moves back into November's last day.
    expect(new Date(shiftByMonths(Date.UTC(2026, 2, 1), -14)).toISOString()).toBe('2025-01-01T00:00:00.000Z');
    expect(new Date(shiftByMonths(Date.UTC(2025, 11, 31, 23, 59), -1)).toISOString().slice(0, 10)).toBe('2025-11-30');
    // A leap February: its 29th day maps into the last day of a 28-day February.
    expect(new Date(shiftByMonths(Date.UTC(2028, 1, 29, 12), 12)).toISOString().slice(0, 10)).toBe('2029-02-28');
  });
});

describe('the demo feed plan', () => {
  const fleet = demoFleet();
  const original = fleet.map((r) => Date.parse(r.event.sampledAt));

  it.each(['2026-12-03', '2026-12-21', '2027-03-01', '2031-08-15'])('on %s: every sample moves by the same number of calendar months, in order, none in the future', (day) => {
    const now = Date.parse(`${day}T12:00:00Z`);
    const plan = planFeed(fleet, { now, durationMs: 1000 });
    const moved = new Map(plan.results.map((r) => [`${r.event.unit}|${r.event.sampleId}|${r.event.revision ?? 0}`, Date.parse(r.event.sampledAt)]));
    const monthNumber = (t: number) => new Date(t).getUTCFullYear() * 12 + new Date(t).getUTCMonth();
    fleet.forEach((r, i) => {
      const t = moved.get(`${r.event.unit}|${r.event.sampleId}|${r.event.revision ?? 0}`)!;
      expect(monthNumber(t) - monthNumber(original[i]!)).toBe(plan.shiftMonths);
      expect(t).toBeLessThanOrEqual(now - DAY_MS);
    });
    // The order of sampling is kept.
    const before = [...fleet.keys()].sort((a, b) => original[a]! - original[b]!);
    const after = before.map((i) => moved.get(`${fleet[i]!.event.unit}|${fleet[i]!.event.sampleId}|${fleet[i]!.event.revision ?? 0}`)!);
    for (let k = 1; k < after.length; k++) expect(after[k]!).toBeGreaterThanOrEqual(after[k - 1]!);
    // Recent: the last sample within about two months of the run.
    expect(now - Date.parse(plan.lastSampledAt)).toBeLessThan(62 * DAY_MS);
  });

  it('plays the same incidents and the same headline on days that used to differ', async () => {
    const config = loadConfig('demo/config.yaml');
    const story = async (day: string) => {
      const now = Date.parse(`${day}T15:00:00Z`);
      const plan = planFeed(fleet, { now, durationMs: 1000 });
      const out = await replayRecords(
        plan.results.map((r, i) => ({ line: i + 1, record: r.event })),
        { config, now },
      );
      const incidents = out.timeline.filter((l) => l.type === 'incident' && ['opened', 'closed', 'returned'].includes(l.change)).map((l) => (l.type === 'incident' ? `${l.incidentId} ${l.change}` : ''));
      const findings = out.timeline.filter((l) => l.type === 'finding').map((l) => (l.type === 'finding' ? `${l.unit}/${l.component} ${l.sampleId} ${l.rule} ${l.measurand} ${l.severity} ${monthOf(Date.parse(l.sampledAt))}` : ''));
      const ref = { unit: 'PS2-P3', component: 'gearbox' };
      const samples = await out.store.revisions(ref);
      const timeline = componentTimeline({
        ...ref,
        sampleDates: samples.map(({ sample }) => ({ sampleId: sample.sampleId, sampledAt: sample.sampledAt })),
        steps: await out.store.findings(ref),
        returnAfterSamples: config.incidents.returnAfterSamples,
      });
      return { incidents, findings: findings.length, shift: plan.shiftMonths, timeline };
    };
    const [a, b, c] = [await story('2026-12-03'), await story('2026-12-21'), await story('2027-02-15')];
    expect(a.incidents.length).toBeGreaterThanOrEqual(4);
    expect(b.incidents).toEqual(a.incidents);
    expect(c.incidents).toEqual(a.incidents);
    expect(c.shift).not.toBe(a.shift);
    expect(b.findings).toBe(a.findings);
    expect(c.findings).toBe(a.findings);
    for (const s of [a, b, c]) {
      expect(s.timeline.samplesAhead).toBe(a.timeline.samplesAhead);
      expect(s.timeline.earliest?.disposition).toBe('incident');
      expect(formatTimeline(s.timeline)).toMatch(/→ caught \d+ samples \(\d+ days\) before the fixed limit$/);
    }
    expect(a.timeline.samplesAhead).toBeGreaterThan(0);
  }, 120_000);
});

describe('componentTimeline', () => {
  const finding = (sampleId: string, sampledAt: string, rule: Finding['rule'], disposition: Finding['disposition'], severity: Finding['severity'] = 'caution'): Finding => ({
    unit: 'U-1',
    component: 'gearbox',
    group: 'g',
    measurand: 'Fe',
    rule,
    severity,
    value: 1,
    basis: 'reading',
    direction: 'up',
    disposition,
    sampleId,
    sampledAt,
    explanation: 'x',
  });
  const dates = Array.from({ length: 8 }, (_, i) => ({ sampleId: `S${i}`, sampledAt: new Date(Date.UTC(2026, 0, 1 + 10 * i)).toISOString() }));
  const at = (i: number) => dates[i]!.sampledAt;

  it('counts the lead from the first finding that opened an incident, listing an earlier advisory as such', () => {
    const steps = [
      { sampleId: 'S2', sampledAt: at(2), findings: [finding('S2', at(2), 'population', 'advisory')] },
      { sampleId: 'S3', sampledAt: at(3), findings: [finding('S3', at(3), 'population', 'advisory'), finding('S3', at(3), 'cusum', 'incident', 'watch')] },
      { sampleId: 'S4', sampledAt: at(4), findings: [finding('S4', at(4), 'cusum', 'incident', 'watch')] },
      { sampleId: 'S6', sampledAt: at(6), findings: [finding('S6', at(6), 'limit', 'incident')] },
    ];
    const t = componentTimeline({ unit: 'U-1', component: 'gearbox', sampleDates: dates, steps, returnAfterSamples: 2 });
    expect(t.earliest).toMatchObject({ rule: 'cusum', sampleId: 'S3', disposition: 'incident' });
    // S3, S4 and S5 come before the fixed limit's S6.
    expect(t.samplesAhead).toBe(3);
    expect(t.daysAhead).toBe(30);
    expect(t.firsts.map((f) => f.rule)).toEqual(['population', 'cusum', 'limit']);
    expect(formatTimeline(t)).toBe(`Fe group limit caution (advisory) ${at(2).slice(0, 10)} · Fe CUSUM watch ${at(3).slice(0, 10)} · Fe fixed limit caution ${at(6).slice(0, 10)} → caught 3 samples (30 days) before the fixed limit`);
  });

  it('says the change was first seen at the fixed limit when only advisories came before it', () => {
    const steps = [
      { sampleId: 'S2', sampledAt: at(2), findings: [finding('S2', at(2), 'population', 'advisory')] },
      { sampleId: 'S3', sampledAt: at(3), findings: [finding('S3', at(3), 'limit', 'incident')] },
    ];
    const t = componentTimeline({ unit: 'U-1', component: 'gearbox', sampleDates: dates, steps, returnAfterSamples: 2 });
    expect(t.earliest?.rule).toBe('limit');
    expect(formatTimeline(t)).toMatch(/→ first seen at the fixed limit$/);
  });
});
