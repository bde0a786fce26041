/**
 * The alarm-management key figures on small hand-built incident lists. Each figure's definition is named beside
 * its test: ISA-18.2 (ANSI/ISA-18.2-2016) / IEC 62682:2022 and EEMUA Publication 191. Their wording and benchmark
 * values are recalled from memory, and the day-scale thresholds are this product's (oil samples arrive days apart).
 */
import { describe, expect, it } from 'vitest';
import { AlarmFiguresSchema } from '../../src/domain/alarmFiguresConfig.ts';
import { ConfigSchema } from '../../src/domain/config.ts';
import type { RuleFamily, Severity } from '../../src/domain/finding.ts';
import type { Measurand } from '../../src/domain/measurands.ts';
import { ACCEPTABLE_PER_DAY, MANAGEABLE_PER_DAY } from '../../src/incidents/alarmBenchmarks.ts';
import { alarmFigures, componentYearsOf, type FigureIncident, type ResponderMap } from '../../src/incidents/alarmFigures.ts';
import type { TimelineEntry } from '../../src/incidents/model.ts';
import { tierZeroResponders } from '../../src/incidents/responders.ts';

const DAY = 86_400_000;
/** Day 0 is Monday 2026-03-02 (UTC). */
const T0 = Date.parse('2026-03-02T00:00:00Z');
const at = (days: number) => new Date(T0 + days * DAY).toISOString();
const thresholds = AlarmFiguresSchema.parse({});
const nobody: ResponderMap = { all: [], of: () => [] };
const everyone = (name: string): ResponderMap => ({ all: [name], of: () => [name] });

let seq = 0;
function incident(unit: string, timeline: TimelineEntry[], extra: Partial<FigureIncident> = {}): FigureIncident {
  const opened = timeline.find((e) => e.kind === 'opened');
  const sampleId = opened && 'sampleId' in opened ? opened.sampleId : `S${++seq}`;
  return { id: `${unit}/gearbox@${sampleId}`, key: `${unit}/gearbox`, unit, component: 'gearbox', group: 'gearboxes', kind: 'machine', peakSeverity: 'caution', timeline, ...extra };
}
const opened = (days: number, severity: Severity = 'caution'): TimelineEntry => ({ kind: 'opened', at: at(days), sampleId: `S${++seq}`, severity });
const finding = (days: number, rule: RuleFamily, measurand: Measurand): TimelineEntry => ({ kind: 'finding', at: at(days), sampleId: `F${++seq}`, change: 'raised', rule, measurand, severity: 'caution' });
const returned = (days: number): TimelineEntry => ({ kind: 'returned', at: at(days), sampleId: `R${++seq}` });
const again = (days: number, reopened = false): TimelineEntry => ({ kind: 'active-again', at: at(days), sampleId: `A${++seq}`, reopened });
const closed = (days: number, how: 'resolved' | 'acknowledged-and-returned' | 'withdrawn' = 'acknowledged-and-returned'): TimelineEntry => ({ kind: 'closed', at: at(days), how });
const acked = (days: number): TimelineEntry => ({ kind: 'acknowledged', at: at(days), by: 'R. Tanaka' });

describe('load per responder (ISA-18.2 / IEC 62682: annunciated alarms per operator position per day; EEMUA 191: per 10 minutes)', () => {
  it('one alarm every 10 minutes is 144 a day: the EEMUA 191 rate (from memory) sits just under the ISA-18.2 ~150 per day acceptable (from memory)', () => {
    const list = Array.from({ length: 144 }, (_, n) => incident(`U${n}`, [{ kind: 'opened', at: new Date(T0 + n * 600_000).toISOString(), sampleId: `X${n}`, severity: 'caution' }]));
    const f = alarmFigures({ incidents: list, from: T0, to: T0 + DAY, thresholds, responders: everyone('email:oncall@plant.example') });
    expect(f.annunciations).toBe(144);
    expect(f.busiest?.perDay).toEqual({ average: 144, peak: 144, peakAt: '2026-03-02' });
    expect(f.busiest!.perDay.average).toBeLessThan(ACCEPTABLE_PER_DAY);
    expect(ACCEPTABLE_PER_DAY).toBeLessThan(MANAGEABLE_PER_DAY);
  });

  it('average over the period, peak calendar day and peak Monday-to-Sunday week, for each tier-0 target', () => {
    const list = [
      incident('A', [opened(0)]),
      incident('B', [opened(0.5)]),
      incident('C', [opened(6.9)]), // Sunday of week 1
      incident('D', [opened(7.1), returned(9), again(10)]), // Monday of week 2, then active again
    ];
    const responders: ResponderMap = { all: ['email:a@plant.example', 'email:idle@plant.example'], of: (i) => (i.unit === 'A' ? [] : ['email:a@plant.example']) };
    const f = alarmFigures({ incidents: list, from: T0, to: T0 + 14 * DAY, thresholds, responders });
    expect(f.annunciations).toBe(5);
    expect(f.unrouted).toBe(1);
    const a = f.responders.find((r) => r.responder === 'email:a@plant.example')!;
    expect(a.annunciations).toBe(4);
    expect(a.perDay).toMatchObject({ peak: 1, peakAt: '2026-03-02' });
    expect(a.perDay.average).toBeCloseTo(4 / 14, 4);
    // Week of 2 March: B, C; week of 9 March: D opened and D active again.
    expect(a.perWeek).toEqual({ average: 2, peak: 2, peakAt: '2026-03-02' });
    expect(f.responders.find((r) => r.responder === 'email:idle@plant.example')).toMatchObject({ annunciations: 0, perDay: { average: 0, peak: 0, peakAt: null } });
    expect(f.busiest?.responder).toBe('email:a@plant.example');
  });

  it('an incident only seen in quiet backfill asked nobody: no responder load, never stale, still counted as opened', () => {
    const list = [incident('A', [opened(0)], { live: false }), incident('B', [opened(1)])];
    const f = alarmFigures({ incidents: list, from: T0, to: T0 + 20 * DAY, thresholds, responders: everyone('mqtt:board') });
    expect(f).toMatchObject({ incidents: 2, annunciations: 2, quiet: 1, unrouted: 0 });
    expect(f.responders[0]!.annunciations).toBe(1);
    expect(f.stale.ids).toEqual([list[1]!.id]);
    expect(f.standing.incidents).toBe(0);
  });

  it('only annunciations inside the period count', () => {
    const list = [incident('A', [opened(-3)]), incident('B', [opened(1)]), incident('C', [opened(30)])];
    const f = alarmFigures({ incidents: list, from: T0, to: T0 + 10 * DAY, thresholds, responders: everyone('mqtt:board') });
    expect(f.annunciations).toBe(1);
    expect(f.incidents).toBe(1);
  });

  it('tier-0 targets of the policy that matches group, kind and severity (the escalation configuration)', () => {
    const config = ConfigSchema.parse({
      channels: { email: { from: 'wearshift <alerts@plant.example>', smtp: { host: 'localhost' } }, webhooks: [{ name: 'lab', url: 'https://lab.example/hook', secrets: ['LAB_SECRET'] }] },
      escalation: {
        policies: [
          { name: 'gearbox-alarms', match: { groups: ['gearboxes'], severities: ['alarm'] }, tiers: [{ afterMinutes: 0, email: ['a@plant.example'] }, { afterMinutes: 60, email: ['boss@plant.example'] }] },
          { name: 'sampling', match: { kinds: ['sampling'] }, tiers: [{ afterMinutes: 0, webhooks: ['lab'] }] },
        ],
      },
    });
    const map = tierZeroResponders(config.escalation.policies);
    expect(map.all).toEqual(['email:a@plant.example', 'webhook:lab']);
    expect(map.of(incident('A', [], { peakSeverity: 'alarm' }))).toEqual(['email:a@plant.example']);
    expect(map.of(incident('A', [], { peakSeverity: 'caution' }))).toEqual([]);
    expect(map.of(incident('A', [], { kind: 'sampling' }))).toEqual(['webhook:lab']);
  });
});

describe('standing incidents (EEMUA 191: a standing alarm stays in the alarm state; benchmark fewer than 10 at once, from memory)', () => {
  it('active longer than standingAfterDays, acknowledged or not, until the return to normal', () => {
    const list = [
      incident('A', [opened(0), acked(1), returned(40)]), // standing from day 30 to 40
      incident('B', [opened(10)]), // standing from day 40, still at the end
      incident('C', [opened(0), returned(29)]), // never standing
      incident('D', [opened(0), returned(20), again(25)]), // a new active stretch from day 25: standing from 55 > end
    ];
    const f = alarmFigures({ incidents: list, from: T0, to: T0 + 50 * DAY, thresholds: { ...thresholds, standingAfterDays: 30 }, responders: nobody });
    expect(f.standing).toEqual({ afterDays: 30, atEnd: 1, peak: 1, peakAt: at(30), incidents: 2, ids: ['B/gearbox@' + (list[1]!.timeline[0] as { sampleId: string }).sampleId] });
    const later = alarmFigures({ incidents: list, from: T0, to: T0 + 60 * DAY, thresholds: { ...thresholds, standingAfterDays: 30 }, responders: nobody });
    expect(later.standing.atEnd).toBe(2);
    expect(later.standing.peak).toBe(2);
    expect(later.standing.peakAt).toBe(at(55));
  });

  it('an incident resolved by hand while active stops standing then', () => {
    const f = alarmFigures({ incidents: [incident('A', [opened(0), closed(35, 'resolved')])], from: T0, to: T0 + 50 * DAY, thresholds, responders: nobody });
    expect(f.standing).toMatchObject({ atEnd: 0, peak: 1, incidents: 1 });
    expect(f.openAtEnd).toBe(0);
  });
});

describe('stale incidents (ISA-18.2: an alarm that remains annunciated for an extended period; benchmark fewer than 5 on any day, from memory)', () => {
  const stale = { ...thresholds, staleAfterDays: 7 };
  it('open and unacknowledged longer than staleAfterDays; an acknowledgement ends it, new evidence that withdraws it starts the clock again', () => {
    const list = [
      incident('A', [opened(0), acked(3)]), // answered in time
      incident('B', [opened(0)]), // stale from day 7
      incident('C', [opened(0), acked(2), { kind: 'unacknowledged', at: at(5), reason: 'new evidence: Cu joined' }]), // stale from day 12
    ];
    const f = alarmFigures({ incidents: list, from: T0, to: T0 + 10 * DAY, thresholds: stale, responders: nobody });
    expect(f.stale).toMatchObject({ atEnd: 1, peak: 1, incidents: 1 });
    const g = alarmFigures({ incidents: list, from: T0, to: T0 + 20 * DAY, thresholds: stale, responders: nobody });
    expect(g.stale).toMatchObject({ atEnd: 2, peak: 2, peakAt: at(12), incidents: 2 });
  });

  it('shelving (ISA-18.2: a shelved alarm is not annunciated) stops the clock; it starts again when the shelving ends', () => {
    const list = [incident('A', [opened(0), { kind: 'shelved', at: at(5), by: 'R. Tanaka', until: at(9), reason: 'pump swap' }])];
    expect(alarmFigures({ incidents: list, from: T0, to: T0 + 15 * DAY, thresholds: stale, responders: nobody }).stale.atEnd).toBe(0);
    const g = alarmFigures({ incidents: list, from: T0, to: T0 + 17 * DAY, thresholds: stale, responders: nobody });
    expect(g.stale).toMatchObject({ atEnd: 1, peakAt: at(16) });
  });

  it('a closed incident is not stale', () => {
    const f = alarmFigures({ incidents: [incident('A', [opened(0), returned(20), closed(20, 'resolved')])], from: T0, to: T0 + 30 * DAY, thresholds: stale, responders: nobody });
    expect(f.stale).toMatchObject({ atEnd: 0, peak: 1, incidents: 1 });
  });
});

describe('chattering (ISA-18.2: an alarm that repeatedly goes between the alarm and the normal state in a short time; benchmark zero, from memory)', () => {
  it('active again within chatteringWithinDays of its return to normal', () => {
    const list = [
      incident('A', [opened(0), returned(20), again(35), returned(60), again(100)]), // 15 days: chatters; 40 days: does not
    ];
    const f = alarmFigures({ incidents: list, from: T0, to: T0 + 120 * DAY, thresholds: { ...thresholds, chatteringWithinDays: 30 }, responders: nobody });
    expect(f.annunciations).toBe(3);
    expect(f.chattering).toEqual({ withinDays: 30, incidents: 1, annunciations: 1, ids: [list[0]!.id] });
  });

  it('a new incident of the same key soon after the previous one ended chatters too; another key does not', () => {
    const first = incident('A', [opened(0), returned(20), closed(21)]);
    const second = incident('A', [opened(30)]);
    const other = incident('B', [opened(25)]);
    const f = alarmFigures({ incidents: [second, other, first], from: T0, to: T0 + 60 * DAY, thresholds: { ...thresholds, chatteringWithinDays: 30 }, responders: nobody });
    expect(f.chattering.ids).toEqual([second.id]);
    const wide = alarmFigures({ incidents: [second, other, first], from: T0, to: T0 + 60 * DAY, thresholds: { ...thresholds, chatteringWithinDays: 5 }, responders: nobody });
    expect(wide.chattering.incidents).toBe(0);
  });
});

describe('bad actors (ISA-18.2 / EEMUA 191: the most frequent alarms; top 10 share ~1–5 % at most, from memory)', () => {
  it('components by annunciations and rule/measurand pairs by incidents, the top N, and the share of the load they cause', () => {
    const list = [
      incident('A', [opened(0), finding(0, 'cusum', 'Fe'), returned(20), again(30), finding(30, 'ewma', 'Fe')]),
      incident('A', [opened(60), finding(60, 'cusum', 'Fe')]),
      incident('B', [opened(1), finding(1, 'cusum', 'Fe'), finding(1, 'limit', 'Cu')]),
      incident('C', [opened(2), finding(2, 'limit', 'Cu')]),
    ];
    const f = alarmFigures({ incidents: list, from: T0, to: T0 + 90 * DAY, thresholds: { ...thresholds, topBadActors: 2 }, responders: nobody });
    expect(f.annunciations).toBe(5);
    expect(f.badActors.components).toEqual([
      { unit: 'A', component: 'gearbox', annunciations: 3, incidents: 2 },
      { unit: 'B', component: 'gearbox', annunciations: 1, incidents: 1 },
    ]);
    expect(f.badActors.pairs).toEqual([
      { rule: 'cusum', measurand: 'Fe', incidents: 3 },
      { rule: 'limit', measurand: 'Cu', incidents: 2 },
    ]);
    expect(f.badActors.topComponentsShare).toBe(0.8);
  });
});

describe('incidents per 100 component-years, per rule family and in total (this product\'s false-alarm budget unit)', () => {
  it('incidents opened in the period over the component-years watched; a family counts every incident it raised a finding in', () => {
    const list = [
      incident('A', [opened(0), finding(0, 'cusum', 'Fe'), finding(3, 'ewma', 'Fe')]),
      incident('B', [opened(5), finding(5, 'cusum', 'Cu')]),
      incident('C', [opened(7), finding(7, 'limit', 'Pb')]),
    ];
    const years = componentYearsOf(20, T0, T0 + 365.25 * DAY / 2); // 20 components for half a year: 10 component-years
    expect(years).toBeCloseTo(10, 12);
    const f = alarmFigures({ incidents: list, from: T0, to: T0 + 180 * DAY, thresholds, responders: nobody, componentYears: years });
    expect(f.incidents).toBe(3);
    expect(f.per100ComponentYears).toBe(30);
    expect(f.byFamily.cusum).toEqual({ incidents: 2, per100ComponentYears: 20 });
    expect(f.byFamily.ewma.incidents).toBe(1);
    expect(f.byFamily.limit.per100ComponentYears).toBe(10);
    expect(f.byFamily.population).toEqual({ incidents: 0, per100ComponentYears: 0 });
    expect(alarmFigures({ incidents: list, from: T0, to: T0 + DAY, thresholds, responders: nobody }).per100ComponentYears).toBeNull();
  });

  it('an incident a late result withdrew is not counted anywhere', () => {
    const f = alarmFigures({ incidents: [incident('A', [opened(0), closed(1, 'withdrawn')])], from: T0, to: T0 + 30 * DAY, thresholds, responders: everyone('mqtt:board') });
    expect(f).toMatchObject({ incidents: 0, annunciations: 0, openAtEnd: 0, standing: { incidents: 0 }, stale: { incidents: 0 } });
  });

  it("an incident a responder's verdict on its sample closed was answered by a person: counted like any other", () => {
    const sampling = (timeline: TimelineEntry[]) => incident('Q', timeline, { kind: 'sampling', key: 'Q/gearbox/sampling' });
    const open = opened(0);
    const sampleId = open.kind === 'opened' ? open.sampleId : '';
    const word: TimelineEntry = { kind: 'sample-verdict', at: at(2), sampleId, verdict: 'rejected', by: 'Jo Sampler' };
    const answered = sampling([open, finding(0, 'sampling', 'Fe'), word, { kind: 'closed', at: at(2), how: 'sample-verdict', by: 'Jo Sampler', sampleId, verdict: 'rejected' }]);
    const counted = { incidents: 1, annunciations: 1, openAtEnd: 0 };
    const period = { from: T0, to: T0 + 30 * DAY, thresholds, responders: everyone('email:samplers@plant.example') };
    expect(alarmFigures({ incidents: [answered], ...period })).toMatchObject({ ...counted, byFamily: { sampling: { incidents: 1 } } });
    // A record closed as withdrawn after the word on its opening sample (written before such a closing had a kind of
    // its own) counts too; a word given to a record a late result had already withdrawn explains nothing.
    const before = sampling([open, finding(0, 'sampling', 'Fe'), word, closed(3, 'withdrawn')]);
    expect(alarmFigures({ incidents: [before], ...period })).toMatchObject(counted);
    const after = sampling([open, finding(0, 'sampling', 'Fe'), closed(1, 'withdrawn'), word]);
    expect(alarmFigures({ incidents: [after], ...period })).toMatchObject({ incidents: 0, annunciations: 0 });
    // A word taken back, or a word on another sample, did not end it.
    const takenBack = sampling([open, word, { ...word, at: at(2.5), verdict: 'withdrawn' } as TimelineEntry, closed(3, 'withdrawn')]);
    const otherSample = sampling([open, { ...word, sampleId: 'elsewhere' } as TimelineEntry, closed(3, 'withdrawn')]);
    expect(alarmFigures({ incidents: [takenBack, otherSample], ...period })).toMatchObject({ incidents: 0, annunciations: 0 });
  });

  it('refuses a period that ends before it starts', () => {
    expect(() => alarmFigures({ incidents: [], from: T0 + DAY, to: T0, thresholds, responders: nobody })).toThrow(/from ≤ to/);
  });
});
