/**
 * What the arrival order reads of a results job before the worker validates it (src/queue/arrivalOrder.ts): its place
 * in the order from its job id, and the component, group and sampling month its data names, with the names taken as
 * validation takes them, so that a batch waits for exactly the results that can change its own.
 */
import { describe, expect, it } from 'vitest';
import { parseConfig } from '../../src/domain/configFile.ts';
import { componentKey } from '../../src/domain/event.ts';
import { groupOf } from '../../src/domain/settings.ts';
import { validateResult } from '../../src/intake/validate.ts';
import { limitOf } from '../../src/queue/arrivalLimit.ts';
import { arrivalJobId, arrivalOf, monthStart, resultAbout, type GroupOf } from '../../src/queue/arrivalOrder.ts';

const config = parseConfig(`
groups:
  - name: lift-gearboxes
    match: { component: gearbox, unit: "^LS" }
`);
const groups: GroupOf = (c) => groupOf(config, c);
const event = (over: Record<string, unknown>) => ({ sampleId: 'A-1', unit: 'LS1', component: 'gearbox', sampledAt: '2026-03-14T08:00:00Z', readings: { Fe: 12 }, ...over });

describe('arrival order of a results job', () => {
  it('reads its place from BullMQ’s number or the producer’s id, and nothing from another id', () => {
    expect(arrivalOf('17')).toBe(17);
    expect(arrivalOf(arrivalJobId(42, 'k3x9'))).toBe(42);
    expect(arrivalOf('r42-')).toBeUndefined();
    expect(arrivalOf('my-own-id')).toBeUndefined();
    expect(arrivalOf(undefined)).toBeUndefined();
  });

  it('names the component, group and month of a result as validation will take them', () => {
    for (const e of [
      event({}),
      // Spaces around names and full-width characters: validation trims and takes NFKC (domain/event.ts).
      event({ unit: ' ＬＳ1 ', component: 'gearbox ' }),
      event({ unit: 'MX4', group: ' lift-gearboxes' }),
      event({ unit: 'MX4' }),
      event({ unit: 'MX4', sampledAt: '2026-03-01T00:30:00+01:00' }),
    ]) {
      const parsed = validateResult(e, { now: Date.parse('2026-12-01T00:00:00Z') });
      if (!parsed.ok) throw new Error(JSON.stringify(parsed.issues));
      const s = parsed.sample;
      expect(resultAbout(e, groups)).toEqual({ component: componentKey(s), group: groups(s), month: monthStart(s.time) });
    }
    // The groups these stand for (the configuration's rule, the event's own group, the component's name).
    expect(resultAbout(event({}), groups).group).toBe('lift-gearboxes');
    expect(resultAbout(event({ unit: 'MX4', group: 'lift-gearboxes' }), groups).group).toBe('lift-gearboxes');
    expect(resultAbout(event({ unit: 'MX4' }), groups).group).toBe('gearbox');
    // The month of a time given with its zone is the UTC month of that instant (February here).
    expect(resultAbout(event({ sampledAt: '2026-03-01T00:30:00+01:00' }), groups).month).toBe(Date.UTC(2026, 1, 1));
  });

  it('names nothing it cannot read, so that the result is waited for as one that may touch anything', () => {
    expect(resultAbout(event({ unit: 7 }), groups)).toEqual({ component: undefined, group: undefined, month: Date.UTC(2026, 2, 1) });
    expect(resultAbout(event({ sampledAt: 'soon' }), groups)).toMatchObject({ month: -Infinity });
    expect(resultAbout('not an object', groups)).toEqual({ component: undefined, group: undefined, month: -Infinity });
    const failing: GroupOf = () => {
      throw new Error('no group');
    };
    expect(resultAbout(event({}), failing)).toMatchObject({ component: undefined, group: undefined });
    // Without a group function every component is in one group.
    expect(resultAbout(event({ unit: 'MX4' })).group).toBe(resultAbout(event({})).group);
  });

  it('limits an evaluation to the month of its own component’s held results and to the end of its group’s earliest', () => {
    const job = (order: number, unit: string | undefined, sampledAt: string) => {
      const about = unit === undefined ? { component: undefined, group: undefined, month: monthStart(Date.parse(sampledAt)) } : resultAbout(event({ unit, sampledAt }), groups);
      return { order, ...about, queued: false, partition: 0 };
    };
    const ls1 = { unit: 'LS1', component: 'gearbox' };
    // Nothing held: no limit.
    expect(limitOf([], ls1, 'lift-gearboxes')).toBeUndefined();
    // Its own result of 14 March: up to 1 March (the month's other samples may be judged with it).
    expect(limitOf([job(1, 'LS1', '2026-03-14T08:00:00Z')], ls1, 'lift-gearboxes')).toBe(Date.UTC(2026, 2, 1));
    // Another unit of its group in March: its March samples may be judged (a month's statistics are those before it), April may not.
    expect(limitOf([job(1, 'LS2', '2026-03-14T08:00:00Z')], ls1, 'lift-gearboxes')).toBe(Date.UTC(2026, 3, 1));
    // December rolls over into the next year.
    expect(limitOf([job(1, 'LS2', '2025-12-30T08:00:00Z')], ls1, 'lift-gearboxes')).toBe(Date.UTC(2026, 0, 1));
    // Another group holds nothing up; the earliest of several counts.
    expect(limitOf([job(1, 'MX2', '2026-01-14T08:00:00Z')], ls1, 'lift-gearboxes')).toBeUndefined();
    expect(limitOf([job(1, 'LS2', '2026-05-02T08:00:00Z'), job(2, 'LS1', '2026-04-20T08:00:00Z'), job(3, 'LS3', '2026-02-02T08:00:00Z')], ls1, 'lift-gearboxes')).toBe(Date.UTC(2026, 2, 1));
    // A result whose component cannot be read may be this one: its month; without a sampling time, nothing is folded.
    expect(limitOf([job(1, undefined, '2026-03-14T08:00:00Z')], ls1, 'lift-gearboxes')).toBe(Date.UTC(2026, 2, 1));
    expect(limitOf([{ ...job(1, undefined, '2026-03-14T08:00:00Z'), month: -Infinity }], ls1, 'lift-gearboxes')).toBe(-Infinity);
    expect(limitOf([{ ...job(1, 'LS2', '2026-03-14T08:00:00Z'), month: -Infinity }], ls1, 'lift-gearboxes')).toBe(-Infinity);
  });
});
