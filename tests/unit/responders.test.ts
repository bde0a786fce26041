/**
 * Who hears of each annunciation (an incident opening or becoming active again: ISA-18.2 / IEC 62682 "annunciation",
 * from memory) for the load per responder: the tier-0 targets of the escalation chain the live annunciation runs at
 * that point (src/incidents/escalation.ts), not of the policy of the incident's final peak severity; and who of the
 * later tiers would be told if nobody acknowledged, as a backtest assumes.
 *
 * The policies split by severity: a caution goes to the desk; an alarm to on-call (tier 0) and then to the lead.
 */
import { describe, expect, it } from 'vitest';
import { backtest } from '../../src/backtest/backtest.ts';
import { AlarmFiguresSchema } from '../../src/domain/alarmFiguresConfig.ts';
import { parseConfig } from '../../src/domain/configFile.ts';
import type { Severity } from '../../src/domain/finding.ts';
import { alarmFigures, type FigureIncident } from '../../src/incidents/alarmFigures.ts';
import type { TimelineEntry } from '../../src/incidents/model.ts';
import { annunciationReach, laterTierTargets, tierZeroResponders } from '../../src/incidents/responders.ts';
import { replayRecords } from '../../src/pipeline/replay.ts';

const DAY = 86_400_000;
const T0 = Date.parse('2026-03-02T00:00:00Z');
const at = (days: number) => new Date(T0 + days * DAY).toISOString();

const CHANNELS = `
channels:
  email:
    from: "wearshift <alerts@plant.example>"
    smtp: { host: localhost }
`;

function policiesYaml(leadAfterMinutes: number): string {
  return `
escalation:
  policies:
    - name: cautions
      match: { severities: [caution] }
      tiers: [{ afterMinutes: 0, email: [desk@plant.example] }]
    - name: alarms
      match: { severities: [alarm] }
      tiers:
        - { afterMinutes: 0, email: [oncall@plant.example] }
        - { afterMinutes: ${leadAfterMinutes}, email: [lead@plant.example] }
`;
}

const DESK = 'email:desk@plant.example';
const ONCALL = 'email:oncall@plant.example';
const LEAD = 'email:lead@plant.example';

// Hand-built timelines, as the verdict (src/incidents/verdict.ts) writes them: the entries of one sample share its time.
let seq = 0;
const sample = (days: number) => ({ at: at(days), sampleId: `S${++seq}` });
function opened(days: number, severity: Severity): TimelineEntry[] {
  const s = sample(days);
  return [
    { kind: 'opened', ...s, severity },
    { kind: 'finding', ...s, change: 'raised', rule: 'limit', measurand: 'water', severity },
  ];
}
function rises(days: number, from: Severity, to: Severity): TimelineEntry[] {
  return [{ kind: 'finding', ...sample(days), change: 'severity-changed', rule: 'limit', measurand: 'water', severity: to, previousSeverity: from }];
}
function returned(days: number, severity: Severity): TimelineEntry[] {
  const s = sample(days);
  return [
    { kind: 'finding', ...s, change: 'cleared', rule: 'limit', measurand: 'water', severity },
    { kind: 'returned', ...s },
  ];
}
function again(days: number, severity: Severity): TimelineEntry[] {
  const s = sample(days);
  return [
    { kind: 'active-again', ...s, reopened: false },
    { kind: 'finding', ...s, change: 'raised', rule: 'limit', measurand: 'water', severity },
  ];
}
function incident(timeline: TimelineEntry[], peakSeverity: Severity): FigureIncident {
  return { id: `U1/gearbox@${seq}`, key: 'U1/gearbox', unit: 'U1', component: 'gearbox', group: 'gearboxes', kind: 'machine', peakSeverity, timeline };
}

const policies = (leadAfterMinutes: number) => parseConfig(`${CHANNELS}${policiesYaml(leadAfterMinutes)}`).escalation.policies;

describe('load per responder: each annunciation by the chain running at that point', () => {
  it('an incident that opens as a caution and rises to an alarm is heard by the desk and then on-call; active again, by on-call only', () => {
    // Opened at caution (the desk's policy), rose to alarm before it returned (on-call's chain starts: new evidence),
    // returned, active again at caution: nothing beyond what was announced, so the alarm chain goes on.
    const i = incident([...opened(0, 'caution'), ...rises(10, 'caution', 'alarm'), ...returned(20, 'alarm'), ...again(40, 'caution')], 'alarm');
    const f = alarmFigures({ incidents: [i], from: T0, to: T0 + 60 * DAY, thresholds: AlarmFiguresSchema.parse({}), responders: tierZeroResponders(policies(60)) });
    expect(f.annunciations).toBe(2);
    const load = Object.fromEntries(f.responders.map((r) => [r.responder, r.annunciations]));
    // By the final peak severity (alarm) the desk would have heard nothing and on-call of both.
    expect(load).toEqual({ [DESK]: 1, [ONCALL]: 2 });
  });

  it('an alarm that later comes back as a caution: the desk hears of it once it rises beyond what was told', () => {
    const i = incident([...opened(0, 'alarm'), ...returned(10, 'alarm'), ...again(30, 'caution')], 'alarm');
    const reach = annunciationReach(policies(60))(i);
    expect(reach.map((r) => r.first)).toEqual([[ONCALL], [ONCALL]]);
    const caution = incident([...opened(0, 'caution'), ...returned(10, 'caution'), ...again(30, 'alarm')], 'alarm');
    expect(annunciationReach(policies(60))(caution).map((r) => r.first)).toEqual([[DESK], [ONCALL]]);
  });

  it('a probe without a timeline falls back on the policy of its highest severity', () => {
    const map = tierZeroResponders(policies(60));
    expect(map.all).toEqual([DESK, ONCALL]);
    expect(map.of(incident([], 'alarm'))).toEqual([ONCALL]);
    expect(map.of(incident([], 'caution'), T0)).toEqual([DESK]);
  });
});

describe('later tiers if nobody acknowledges', () => {
  it('a tier is reached when its delay after the chain started passes before the return to normal', () => {
    const twoWeeks = 14 * 24 * 60;
    expect(laterTierTargets(policies(twoWeeks))).toEqual([LEAD]);
    // Active for 10 days, then 30 days later active again without news: the chain that started on day 0 goes on, and
    // its second tier falls due (day 14) while the incident has returned: it is told when the incident is active again.
    const i = incident([...opened(0, 'alarm'), ...returned(10, 'alarm'), ...again(40, 'alarm')], 'alarm');
    expect(annunciationReach(policies(twoWeeks))(i).map((r) => [r.first, r.unanswered])).toEqual([
      [[ONCALL], []],
      [[ONCALL], [LEAD]],
    ]);
    // A one-hour delay passes long before the return to normal.
    expect(annunciationReach(policies(60))(i).map((r) => r.unanswered)).toEqual([[LEAD], [LEAD]]);
  });

  it('a closed incident that reopens starts its chain again: a tier is reached by its delay after the reopening', () => {
    const twoWeeks = 14 * 24 * 60;
    // Closed (resolved by hand, nobody acknowledged) on day 10, reopened on day 40 without news, returned on day 50:
    // the chain that started on day 0 does not go on (its lead would be long due), a new one starts on day 40 and its
    // second tier (day 54) is not reached before the return.
    const reopened: TimelineEntry[] = [
      ...opened(0, 'alarm'),
      { kind: 'closed', at: at(10), how: 'resolved', by: 'R. Tanaka', note: 'breather replaced' },
      ...again(40, 'alarm').map((e) => (e.kind === 'active-again' ? { ...e, reopened: true } : e)),
      ...returned(50, 'alarm'),
    ];
    expect(annunciationReach(policies(twoWeeks))(incident(reopened, 'alarm')).map((r) => [r.first, r.unanswered])).toEqual([
      [[ONCALL], []],
      [[ONCALL], []],
    ]);
  });
});

describe('the same responders as the annunciation tells, on a history replayed through the pipeline', () => {
  // Water: caution at 500, alarm at 1000. The incident opens as a caution, rises to an alarm, returns to normal after
  // two clean samples and comes back as a caution.
  const WATER = [100, 100, 800, 1500, 100, 100, 800, 100, 100, 100];
  const records = WATER.map((w, n) => ({
    line: n + 1,
    record: { sampleId: `W${n}`, unit: 'U1', component: 'gearbox', sampledAt: at(14 * n), unitHours: 1000 + 250 * n, oilHours: 250 * (n + 1), readings: { Fe: 20, water: w } },
  }));
  const yaml = (leadAfterMinutes: number) => `
detection: { measurands: [] }
population: { measurands: [] }
defaults:
  limits: { water: { caution: 500, alarm: 1000 } }
${CHANNELS}${policiesYaml(leadAfterMinutes)}`;

  it('tier 0 and the tiers due at once are exactly who the live annunciation sends to in each active stretch', async () => {
    // The lead's tier is due at once: the annunciation tells it without a scheduled check, so everyone it names is
    // in the incident's record of notifications.
    const config = parseConfig(yaml(0));
    const outcome = await replayRecords(records, { config, now: T0 + 365 * DAY, arrival: 'sampled' });
    const incidents = outcome.store.incidents();
    expect(incidents).toHaveLength(1);
    const inc = incidents[0]!;
    const reach = annunciationReach(config.escalation.policies)(inc);
    expect(reach.map((r) => [r.first, r.unanswered])).toEqual([
      [[DESK, ONCALL], [LEAD]],
      [[ONCALL], [LEAD]],
    ]);
    const ends = inc.timeline.filter((e) => e.kind === 'returned').map((e) => Date.parse(e.at));
    for (const [n, r] of reach.entries()) {
      const end = ends.find((t) => t > r.t) ?? Number.POSITIVE_INFINITY;
      const told = new Set(inc.notifications.filter((x) => Date.parse(x.at) >= r.t && Date.parse(x.at) < end).flatMap((x) => x.targets));
      expect([...told].sort(), `annunciation ${n + 1}`).toEqual([...r.first, ...r.unanswered].sort());
    }
  });

  it('the backtest counts tier 0 as the load and lists the later tier apart', async () => {
    const result = await backtest(records, { file: 'w.jsonl', configurations: [{ label: 'c', configFile: null, config: parseConfig(yaml(120)) }], now: T0 + 365 * DAY });
    const run = result.summary.runs[0]!;
    expect(Object.fromEntries(run.alarmFigures.responders.map((r) => [r.responder, r.annunciations]))).toEqual({ [DESK]: 1, [ONCALL]: 2 });
    expect(run.escalation).toEqual({ annunciations: 2, responders: [{ responder: LEAD, annunciations: 2 }] });
  });
});
