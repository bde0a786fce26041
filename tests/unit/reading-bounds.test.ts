/**
 * The implausibly-large check by unit: a reading above what its unit can hold (100 %, a million ppm, ...) is refused
 * with the record's field and the reason, a number or a censored bound alike; a reading at the bound is taken; and a
 * reading stored before these bounds still reads back.
 */
import { describe, expect, it } from 'vitest';
import { parseResultEvent, type Sample } from '../../src/domain/event.ts';
import { MEASURAND_NAMES, MEASURANDS } from '../../src/domain/measurands.ts';
import { MAX_BY_UNIT, maxReading } from '../../src/domain/reading.ts';
import { decodeSample, encodeSample } from '../../src/pipeline/sampleCodec.ts';

const event = { sampleId: 'B-1', unit: 'GEN-1', component: 'engine', sampledAt: '2026-03-01T08:00:00Z' };

function issuesOf(readings: Record<string, unknown>) {
  const parsed = parseResultEvent({ ...event, readings });
  return parsed.ok ? [] : parsed.issues;
}

describe('readings bounded by their unit', () => {
  it('has a bound for every unit of the measurand catalogue', () => {
    const units = new Set(MEASURAND_NAMES.map((m) => MEASURANDS[m].unit));
    for (const unit of units) expect(MAX_BY_UNIT[unit], unit).toBeGreaterThan(0);
  });

  it('refuses a percentage above 100 and a ppm reading above a million, naming the field, the value and the bound', () => {
    expect(issuesOf({ soot: 2_000_000, Fe: 1e9, tbn: 8 })).toEqual([
      { path: 'readings.soot', reason: 'is implausibly large (got 2000000, at most 100 %)' },
      { path: 'readings.Fe', reason: 'is implausibly large (got 1000000000, at most 1000000 ppm)' },
    ]);
    expect(issuesOf({ fuel: 100.5 })).toEqual([{ path: 'readings.fuel', reason: 'is implausibly large (got 100.5, at most 100 %)' }]);
  });

  it('refuses a censored bound above the unit\'s bound too, and a number written as text', () => {
    expect(issuesOf({ Cu: '<2000000' })).toEqual([{ path: 'readings.Cu', reason: 'is implausibly large (got "<2000000", at most 1000000 ppm)' }]);
    expect(issuesOf({ glycol: '>150' })).toEqual([{ path: 'readings.glycol', reason: 'is implausibly large (got ">150", at most 100 %)' }]);
    expect(issuesOf({ water: '2e6' })).toEqual([{ path: 'readings.water', reason: 'is implausibly large (got 2000000, at most 1000000 ppm)' }]);
  });

  it('takes every measurand at its bound, and refuses it just above', () => {
    for (const m of MEASURAND_NAMES.filter((n) => n !== 'iso4406')) {
      const max = maxReading(m);
      expect(issuesOf({ [m]: max }), `${m} at ${max}`).toEqual([]);
      expect(issuesOf({ [m]: max * 1.01 })[0], `${m} above ${max}`).toMatchObject({ path: `readings.${m}`, reason: expect.stringMatching(/^is implausibly large/) });
    }
  });

  it('reads back a reading stored before the bounds by unit (accepted then, at most 1e9)', () => {
    const parsed = parseResultEvent({ ...event, readings: { soot: 1 } });
    if (!parsed.ok) throw new Error('unreachable');
    const old: Sample = { ...parsed.sample, readings: { soot: { kind: 'value', value: 5000 } } };
    expect(decodeSample(encodeSample(old), { unit: event.unit, component: event.component }).readings.soot).toEqual({ kind: 'value', value: 5000 });
  });
});
