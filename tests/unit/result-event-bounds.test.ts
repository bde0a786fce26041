/** What one result record may hold and how its problems are reported: bounded whatever is sent, every one at once. */
import { describe, expect, it } from 'vitest';
import { z } from 'zod';
import { ResultEventSchema } from '../../src/domain/event.ts';
import { MEASURAND_NAMES } from '../../src/domain/measurands.ts';
import { validateResult } from '../../src/intake/validate.ts';

const NOW = Date.parse('2026-03-02T00:00:00Z');
const event = { sampleId: 'L-1', unit: 'U', component: 'engine', sampledAt: '2026-03-01T08:00:00Z', readings: { Fe: 3 } };

describe('the problems of one record', () => {
  it('refuses readings with more entries than the catalogue has measurands on their count, beside the other problems', () => {
    const wide: Record<string, number> = {};
    for (let i = 0; i < 300_000; i++) wide[`m${i}`] = i;
    const parsed = validateResult({ ...event, unit: '', readings: wide }, { now: NOW });
    expect(parsed.ok).toBe(false);
    expect(!parsed.ok && parsed.issues).toEqual([
      { path: 'readings', reason: `readings hold 300000 entries, more than the ${MEASURAND_NAMES.length} measurands of the catalogue: each measurand may appear once (see the measurand catalogue in the README)` },
      { path: 'unit', reason: 'unit must not be empty' },
    ]);
    // At the catalogue's size every entry is judged: all of them valid is a result, one bad one names itself.
    const all = Object.fromEntries(MEASURAND_NAMES.map((m) => [m, m === 'iso4406' ? '18/16/13' : 1]));
    expect(validateResult({ ...event, readings: all }, { now: NOW }).ok).toBe(true);
    const oneOver = validateResult({ ...event, readings: { ...all, Zz: 1 } }, { now: NOW });
    expect(!oneOver.ok && oneOver.issues.map((i) => i.path)).toEqual(['readings']);
    // The published schema says so too.
    expect(ResultEventSchema.safeParse({ ...event, readings: { ...all, Zz: 1 } }).success).toBe(false);
    const published = z.toJSONSchema(ResultEventSchema, { io: 'input' }) as unknown as { properties: { readings: { maxProperties?: number } } };
    expect(published.properties.readings.maxProperties).toBe(MEASURAND_NAMES.length);
  });

  it('names the first few unknown fields and counts the rest; echoes a long name cut short', () => {
    const extra = Object.fromEntries(Array.from({ length: 1000 }, (_, i) => [`f${i}`, i]));
    const parsed = validateResult({ ...event, ...extra }, { now: NOW });
    expect(!parsed.ok && parsed.issues).toEqual([{ path: '', reason: expect.stringMatching(/^unknown fields "f0", "f1", "f2", "f3", "f4" and 995 more \(a result event holds sampleId, /) }]);
    const one = validateResult({ ...event, colour: 'amber' }, { now: NOW });
    expect(!one.ok && one.issues).toEqual([{ path: '', reason: expect.stringMatching(/^unknown field "colour" \(/) }]);
    const longName = 'X'.repeat(100_000);
    const long = validateResult({ ...event, readings: { Fe: 1, [longName]: 2 } }, { now: NOW });
    expect(!long.ok && long.issues).toEqual([{ path: `readings.${'X'.repeat(40)}…`, reason: 'a measurand name is at most 40 characters' }]);
    const longField = validateResult({ ...event, [longName]: 1 }, { now: NOW });
    expect(!longField.ok && JSON.stringify(longField.issues).length).toBeLessThan(1000);
  });

  it('reports a sampledAt in the future beside the other problems of the record, not instead of them', () => {
    const future = '2026-03-05T08:00:00Z';
    const both = validateResult({ ...event, sampledAt: future, readings: { Fe: -5 } }, { now: NOW });
    expect(!both.ok && both.issues).toEqual([
      { path: 'readings.Fe', reason: 'must not be negative (got -5)' },
      { path: 'sampledAt', reason: 'lies in the future (2026-03-05T08:00:00.000Z is more than 1 day after the server clock 2026-03-02T00:00:00.000Z)' },
    ]);
    const three = validateResult({ ...event, unit: undefined, sampledAt: future, readings: { Fe: 1, Zz: 2 }, colour: 'amber' }, { now: NOW });
    expect(!three.ok && three.issues.map((i) => i.path)).toEqual(['', 'unit', 'readings.Zz', 'sampledAt']);
    // On its own it is the one problem; a sampledAt that is not a time is reported as such, not as in the future.
    const alone = validateResult({ ...event, sampledAt: future }, { now: NOW });
    expect(!alone.ok && alone.issues.map((i) => i.path)).toEqual(['sampledAt']);
    const notATime = validateResult({ ...event, sampledAt: '2099-13-45', readings: { Fe: -5 } }, { now: NOW });
    expect(!notATime.ok && notATime.issues.map((i) => [i.path, i.reason.startsWith('lies in the future')])).toEqual([
      ['sampledAt', false],
      ['readings.Fe', false],
    ]);
    // Inside the allowance nothing is added.
    const fine = validateResult({ ...event, sampledAt: '2026-03-02T23:00:00Z', readings: { Fe: -5 } }, { now: NOW });
    expect(!fine.ok && fine.issues.map((i) => i.path)).toEqual(['readings.Fe']);
  });

  it('refuses a sampledAt before 1970 as a slip in the year, naming the field', () => {
    const typo = validateResult({ ...event, sampledAt: '0202-03-01T08:00:00Z' }, { now: NOW });
    expect(!typo.ok && typo.issues).toEqual([{ path: 'sampledAt', reason: 'sampledAt lies before 1970-01-01: no used-oil sample is that old (a typing slip in the year?)' }]);
    expect(validateResult({ ...event, sampledAt: '1969-12-31T23:59:59Z' }, { now: NOW }).ok).toBe(false);
    expect(validateResult({ ...event, sampledAt: '1970-01-01T00:00:00Z' }, { now: NOW }).ok).toBe(true);
  });
});
