/**
 * The sampling family: sampling and data faults are findings of their own, keep their sample out of the wear
 * analysis and hold the other findings at it, until a responder confirms the sample. The faults are the ones labs
 * and condition-monitoring engineers meet (common practice): a bottle of new oil sent by mistake, an unreported
 * drain, a wrong label, a duplicated bottle, another unit's sample.
 */
import { describe, expect, it } from 'vitest';
import { evaluateComponent } from '../../src/analysis/evaluate.ts';
import type { SampleMark } from '../../src/analysis/model.ts';
import type { Sample } from '../../src/domain/event.ts';
import type { Finding } from '../../src/domain/finding.ts';
import { sample, settingsFrom } from './history-fixtures.ts';

const settings = settingsFrom(`
detection: { measurands: [Fe, Cu], runningInHours: 0, baselineIntervals: 4 }
groups:
  - name: pump-gearboxes
    limits: { Fe: { caution: 45, alarm: 70 } }
`);

/** A healthy charge: Fe and Cu rising with the oil hours, additives steady. */
function charge(days: number[], start = 0): Sample[] {
  return days.map((day, i) =>
    sample(day, {
      unitHours: 1000 + (start + i + 1) * 250,
      oilHours: (start + i + 1) * 250,
      readings: { Fe: 8 + 6 * (start + i), Cu: 2 + (start + i), Ca: 2400, Zn: 1100, P: 950, Si: 4 },
    }),
  );
}

function run(samples: Sample[], marks: Record<string, SampleMark> = {}) {
  const ev = evaluateComponent(samples, settings, undefined, { marks: new Map(Object.entries(marks)) });
  const at = (sampleId: string) => ev.steps.find((s) => s.sampleId === sampleId)!;
  const sampling = (sampleId: string) => at(sampleId).findings.filter((f) => f.rule === 'sampling');
  return { ev, at, sampling };
}

const checks = (fs: readonly Finding[]) => fs.map((f) => f.check);

describe('sampling checks', () => {
  it('a bottle of new oil in the middle of a charge: in doubt, kept out of the trend, no wear finding from it', () => {
    const healthy = charge([10, 20, 30, 40, 50]);
    const bottle = sample(60, { unitHours: 2500, oilHours: 1500, readings: { Fe: 1, Cu: '<1', Ca: 2400, Zn: 1100, P: 950, Si: 4 } });
    const after = sample(70, { unitHours: 2750, oilHours: 1750, readings: { Fe: 44, Cu: 8, Ca: 2400, Zn: 1100, P: 950, Si: 4 } });
    const { at, sampling } = run([...healthy, bottle, after]);
    expect(checks(sampling(bottle.sampleId))).toEqual(['new-oil-mid-charge']);
    expect(at(bottle.sampleId).status).toBe('in-doubt');
    expect(sampling(bottle.sampleId)[0]!.explanation).toMatch(/Re-sample/);
    // The next sample continues the charge from the last accepted one: no fall in wear rate, no sampling finding.
    expect(at(after.sampleId).findings.filter((f) => f.rule === 'sampling')).toEqual([]);
    expect(at(after.sampleId).status).toBeUndefined();
  });

  it('oil hours going back: an unreported drain when the metals fell with them, a wrong label when they did not', () => {
    const healthy = charge([10, 20, 30, 40]);
    const drained = sample(50, { unitHours: 2250, oilHours: 40, readings: { Fe: 4, Cu: 1, Ca: 2400, Zn: 1100, P: 950, Si: 4 } });
    const drain = run([...healthy, drained]);
    expect(drain.sampling(drained.sampleId)).toMatchObject([{ check: 'oil-hours-back', severity: 'watch', disposition: 'incident' }]);
    expect(drain.at(drained.sampleId).status).toBeUndefined();
    expect(drain.ev.history.charges.length).toBe(2);

    const mislabelled = sample(50, { unitHours: 2250, oilHours: 40, readings: { Fe: 32, Cu: 6, Ca: 2400, Zn: 1100, P: 950, Si: 4 } });
    const label = run([...healthy, mislabelled]);
    expect(label.sampling(mislabelled.sampleId)).toMatchObject([{ check: 'oil-hours-back', severity: 'caution' }]);
    expect(label.at(mislabelled.sampleId).status).toBe('in-doubt');
  });

  it('unit hours going backwards, one metal far below what the charge holds, a duplicated bottle, another oil', () => {
    const healthy = charge([10, 20, 30, 40, 50]);
    const back = sample(60, { unitHours: 1500, oilHours: 1500, readings: { Fe: 38, Cu: 7, Ca: 2400, Zn: 1100, P: 950, Si: 4 } });
    expect(checks(run([...healthy, back]).sampling(back.sampleId))).toEqual(['unit-hours-back']);

    const drop = sample(60, { unitHours: 2500, oilHours: 1500, readings: { Fe: 9, Cu: 7, Ca: 2400, Zn: 1100, P: 950, Si: 4 } });
    expect(checks(run([...healthy, drop]).sampling(drop.sampleId))).toEqual(['reading-drop']);

    const twin = sample(60, { sampleId: 'S-TWIN', unitHours: 2250, oilHours: 1250, readings: { Fe: 32, Cu: 6, Ca: 2400, Zn: 1100, P: 950, Si: 4 } });
    const duplicated = run([...healthy, twin]);
    expect(checks(duplicated.sampling('S-TWIN'))).toContain('duplicate-bottle');
    expect(duplicated.sampling('S-TWIN').find((f) => f.check === 'duplicate-bottle')!.explanation).toContain(healthy[4]!.sampleId);

    const foreign = sample(60, { unitHours: 2500, oilHours: 1500, readings: { Fe: 38, Cu: 7, Ca: 3900, Zn: 300, P: 950, Si: 4 } });
    const other = run([...healthy, foreign]);
    expect(checks(other.sampling(foreign.sampleId))).toEqual(['foreign-oil']);
    expect(other.at(foreign.sampleId).status).toBe('in-doubt');
  });

  it('holds the other findings of a sample in doubt, and counts them once a responder confirms it', () => {
    const healthy = charge([10, 20, 30, 40, 50]);
    // Another unit's bottle: other oil, and iron above the fixed alarm level of the group.
    const foreign = sample(60, { unitHours: 2500, oilHours: 1500, readings: { Fe: 90, Cu: 7, Ca: 3900, Zn: 300, P: 950, Si: 4 } });
    const doubt = run([...healthy, foreign]);
    const limit = doubt.at(foreign.sampleId).findings.find((f) => f.rule === 'limit')!;
    expect(limit).toMatchObject({ severity: 'alarm', disposition: 'held' });

    const confirmed = run([...healthy, foreign], { [foreign.sampleId]: 'confirmed' });
    expect(confirmed.sampling(foreign.sampleId)).toEqual([]);
    expect(confirmed.at(foreign.sampleId).status).toBe('confirmed');
    expect(confirmed.at(foreign.sampleId).findings.find((f) => f.rule === 'limit')).toMatchObject({ disposition: 'incident' });

    const rejected = run([...healthy, foreign], { [foreign.sampleId]: 'rejected' });
    expect(rejected.at(foreign.sampleId)).toMatchObject({ status: 'rejected', findings: [] });
  });

  it('a healthy charge raises no sampling finding', () => {
    const { ev } = run(charge([10, 20, 30, 40, 50, 60, 70, 80]));
    expect(ev.steps.flatMap((s) => s.findings).filter((f) => f.rule === 'sampling')).toEqual([]);
    expect(ev.steps.every((s) => s.status === undefined)).toBe(true);
  });
});
