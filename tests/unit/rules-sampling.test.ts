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
import { sampleWide, subjectOf, type Finding } from '../../src/domain/finding.ts';
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

  it('unit hours going backwards: a wrong label or a replaced hour meter', () => {
    const healthy = charge([10, 20, 30, 40, 50]);
    const back = sample(60, { unitHours: 1500, oilHours: 1500, readings: { Fe: 38, Cu: 7, Ca: 2400, Zn: 1100, P: 950, Si: 4 } });
    const { at, sampling } = run([...healthy, back]);
    expect(checks(sampling(back.sampleId))).toEqual(['unit-hours-back']);
    expect(at(back.sampleId).status).toBe('in-doubt');
    expect(sampling(back.sampleId)[0]!.explanation).toMatch(/Check the label/);
  });

  it('one metal far below what the charge already holds, also when the lab reports it censored', () => {
    const healthy = charge([10, 20, 30, 40, 50]);
    const drop = sample(60, { unitHours: 2500, oilHours: 1500, readings: { Fe: 9, Cu: 7, Ca: 2400, Zn: 1100, P: 950, Si: 4 } });
    expect(checks(run([...healthy, drop]).sampling(drop.sampleId))).toEqual(['reading-drop']);
    // "<2" says the iron is at most 2 ppm, after 32 ppm on the same charge: far below, whatever the exact value.
    const censored = sample(60, { unitHours: 2500, oilHours: 1500, readings: { Fe: '<2', Cu: 7, Ca: 2400, Zn: 1100, P: 950, Si: 4 } });
    const { at, sampling } = run([...healthy, censored]);
    expect(checks(sampling(censored.sampleId))).toEqual(['reading-drop']);
    expect(at(censored.sampleId).status).toBe('in-doubt');
    // A censored reading near a low level is no drop: "<2" after 3 ppm of copper tells nothing.
    const low = charge([10, 20, 30]).map((s) => ({ ...s, readings: { ...s.readings, Fe: { kind: 'value' as const, value: 3 } } }));
    const lowCensored = sample(40, { unitHours: 2000, oilHours: 1000, readings: { Fe: '<2', Cu: 5, Ca: 2400, Zn: 1100, P: 950, Si: 4 } });
    expect(run([...low, lowCensored]).sampling(lowCensored.sampleId)).toEqual([]);
  });

  it('a replaced hour meter: the second sample that agrees with the first one in doubt is accepted, and the ones after it are judged again', () => {
    const healthy = charge([10, 20, 30, 40, 50]);
    // The unit hours restart near zero and go on from there; the wear goes on as before.
    const after = [60, 70, 80, 90].map((day, i) =>
      sample(day, { unitHours: 10 + i * 250, oilHours: 1500 + i * 250, readings: { Fe: 38 + 6 * i, Cu: 7 + i, Ca: 2400, Zn: 1100, P: 950, Si: 4 } }),
    );
    const { at, sampling } = run([...healthy, ...after]);
    expect(checks(sampling(after[0]!.sampleId))).toEqual(['unit-hours-back']);
    expect(at(after[0]!.sampleId).status).toBe('in-doubt');
    for (const later of after.slice(1)) {
      expect(sampling(later.sampleId)).toEqual([]);
      expect(at(later.sampleId).status).toBeUndefined();
    }
    // Iron passes the caution level of 45 ppm on the accepted samples: an incident finding, not a held one.
    const fe = at(after[2]!.sampleId).findings.find((f) => f.rule === 'limit' && f.measurand === 'Fe');
    expect(fe).toMatchObject({ disposition: 'incident', severity: 'caution' });
  });

  it('a change of oil through top-ups: the second sample of the new oil is accepted, the first one stays in doubt until confirmed', () => {
    const healthy = charge([10, 20, 30, 40, 50]);
    const newOil = [60, 70, 80].map((day, i) =>
      sample(day, { unitHours: 2500 + i * 250, oilHours: 1500 + i * 250, readings: { Fe: 38 + 6 * i, Cu: 7 + i, Ca: 3900, Zn: 300, P: 950, Si: 4 } }),
    );
    const { at, sampling } = run([...healthy, ...newOil]);
    expect(checks(sampling(newOil[0]!.sampleId))).toEqual(['foreign-oil']);
    expect(at(newOil[0]!.sampleId).status).toBe('in-doubt');
    expect(at(newOil[1]!.sampleId).status).toBeUndefined();
    expect(at(newOil[2]!.sampleId).status).toBeUndefined();
  });

  it('two faults in a row that do not agree with each other both stay in doubt', () => {
    const healthy = charge([10, 20, 30, 40, 50]);
    const bottle = sample(60, { unitHours: 2500, oilHours: 1500, readings: { Fe: 1, Cu: '<1', Ca: 2400, Zn: 1100, P: 950, Si: 4 } });
    const foreign = sample(70, { unitHours: 2750, oilHours: 1750, readings: { Fe: 44, Cu: 8, Ca: 3900, Zn: 300, P: 950, Si: 4 } });
    const { at } = run([...healthy, bottle, foreign]);
    expect(at(bottle.sampleId).status).toBe('in-doubt');
    expect(at(foreign.sampleId).status).toBe('in-doubt');
  });

  it('a reading at an alarm level on a sample in doubt is not held back: it opens its incident and says the sample is in doubt', () => {
    const healthy = charge([10, 20, 30, 40, 50]);
    const back = sample(60, { unitHours: 1500, oilHours: 1500, readings: { Fe: 80, Cu: 7, Ca: 2400, Zn: 1100, P: 950, Si: 4 } });
    const { at } = run([...healthy, back]);
    expect(at(back.sampleId).status).toBe('in-doubt');
    const fe = at(back.sampleId).findings.find((f) => f.rule === 'limit' && f.measurand === 'Fe')!;
    expect(fe).toMatchObject({ severity: 'alarm', disposition: 'incident' });
    expect(fe.explanation).toMatch(/in doubt/);
    // A caution-level reading on a sample in doubt stays held.
    const cautious = sample(60, { unitHours: 1500, oilHours: 1500, readings: { Fe: 50, Cu: 7, Ca: 2400, Zn: 1100, P: 950, Si: 4 } });
    const held = run([...healthy, cautious]).at(cautious.sampleId).findings.find((f) => f.rule === 'limit' && f.measurand === 'Fe')!;
    expect(held).toMatchObject({ severity: 'caution', disposition: 'held' });
  });

  it('a duplicated bottle: identical readings under two sample numbers', () => {
    const healthy = charge([10, 20, 30, 40, 50]);
    const twin = sample(60, { sampleId: 'S-TWIN', unitHours: 2250, oilHours: 1250, readings: { Fe: 32, Cu: 6, Ca: 2400, Zn: 1100, P: 950, Si: 4 } });
    const duplicated = run([...healthy, twin]);
    expect(checks(duplicated.sampling('S-TWIN'))).toContain('duplicate-bottle');
    expect(duplicated.sampling('S-TWIN').find((f) => f.check === 'duplicate-bottle')!.explanation).toContain(healthy[4]!.sampleId);
    expect(duplicated.at('S-TWIN').status).toBe('in-doubt');
  });

  it('another unit\'s sample: the additive elements do not match the charge\'s oil', () => {
    const healthy = charge([10, 20, 30, 40, 50]);
    const foreign = sample(60, { unitHours: 2500, oilHours: 1500, readings: { Fe: 38, Cu: 7, Ca: 3900, Zn: 300, P: 950, Si: 4 } });
    const other = run([...healthy, foreign]);
    expect(checks(other.sampling(foreign.sampleId))).toEqual(['foreign-oil']);
    expect(other.at(foreign.sampleId).status).toBe('in-doubt');
  });

  it('the oil reference carries over a drain while the oil stays the same, so a short charge is judged from its second sample', () => {
    const first = charge([10, 20, 30]);
    const drained = sample(40, { unitHours: 2000, oilHours: 250, oilChanged: true, readings: { Fe: 9, Cu: 2, Ca: 2450, Zn: 1080, P: 960, Si: 4 } });
    const foreign = sample(50, { unitHours: 2250, oilHours: 500, readings: { Fe: 15, Cu: 3, Ca: 3900, Zn: 300, P: 950, Si: 4 } });
    expect(checks(run([...first, drained, foreign]).sampling(foreign.sampleId))).toEqual(['foreign-oil']);
    // A new charge of another oil starts a reference of its own: its samples are not judged against the old oil.
    const otherOil = (day: number, oilHours: number, oilChanged: boolean) =>
      sample(day, { unitHours: 1750 + oilHours, oilHours, oilChanged, readings: { Fe: 4 + oilHours / 50, Cu: 1 + oilHours / 250, Ca: 3900, Zn: 300, P: 950, Si: 4 } });
    const changed = run([...first, otherOil(40, 250, true), otherOil(50, 500, false), otherOil(60, 750, false)]);
    expect(changed.ev.steps.flatMap((s) => s.findings).filter((f) => f.check === 'foreign-oil')).toEqual([]);
  });

  it('a new-oil bottle is recognised from one clearly shown metal when the charge\'s metals add up', () => {
    // Copper near its detection limit: only iron shows clearly, but iron and copper together held more than 8 ppm.
    const healthy = [10, 20, 30, 40, 50].map((day, i) =>
      sample(day, { unitHours: 1250 + i * 250, oilHours: 250 * (i + 1), readings: { Fe: 6 + 5 * i, Cu: i < 2 ? '<1' : 1.6, Ca: 2400, Zn: 1100, P: 950, Si: 4 } }),
    );
    const bottle = sample(60, { unitHours: 2500, oilHours: 1500, readings: { Fe: '<1', Cu: '<1', Ca: 2400, Zn: 1100, P: 950, Si: 1 } });
    const { at, sampling } = run([...healthy, bottle]);
    expect(checks(sampling(bottle.sampleId))).toEqual(['new-oil-mid-charge']);
    expect(at(bottle.sampleId).status).toBe('in-doubt');
    // Early in a charge, with little metal to lose, readings near the detection limit are no fault.
    const early = [sample(10, { unitHours: 1250, oilHours: 250, readings: { Fe: 3.5, Cu: '<1', Ca: 2400, Zn: 1100, P: 950, Si: 4 } })];
    const limit = sample(20, { unitHours: 1500, oilHours: 500, readings: { Fe: '<1', Cu: '<1', Ca: 2400, Zn: 1100, P: 950, Si: 4 } });
    expect(run([...early, limit]).sampling(limit.sampleId)).toEqual([]);
  });

  it('a wear rate falling over several samples: a sampling finding, the samples stay in the trend', () => {
    // Iron gains 6 ppm per 250 h for eight samples (the baseline is 4 intervals), then about nothing for six (no two bottles alike).
    const rising = Array.from({ length: 9 }, (_, i) => sample(10 * (i + 1), { unitHours: 1250 + 250 * i, oilHours: 250 * (i + 1), readings: { Fe: 8 + 6 * i, Cu: 2, Ca: 2400, Zn: 1100, P: 950, Si: 4 } }));
    const flat = Array.from({ length: 6 }, (_, i) => sample(100 + 10 * i, { unitHours: 3500 + 250 * i, oilHours: 2500 + 250 * i, readings: { Fe: 56.5 + 0.5 * i, Cu: 2, Ca: 2400, Zn: 1100, P: 950, Si: 4 } }));
    const { ev } = run([...rising, ...flat]);
    const falls = ev.steps.flatMap((s) => s.findings).filter((f) => f.check === 'rate-fall');
    expect(falls.length).toBeGreaterThan(0);
    expect(falls[0]).toMatchObject({ rule: 'sampling', measurand: 'Fe', direction: 'down', disposition: 'incident' });
    expect(falls.every((f) => flat.some((s) => s.sampleId === f.sampleId))).toBe(true);
    // A genuine event, not a suspect bottle: the samples are not put in doubt.
    expect(ev.steps.every((s) => s.status === undefined)).toBe(true);
  });

  it('holds the other findings of a sample in doubt, and counts them once a responder confirms it', () => {
    const healthy = charge([10, 20, 30, 40, 50]);
    // Another unit's bottle: other oil, and iron above the fixed caution level of the group.
    const foreign = sample(60, { unitHours: 2500, oilHours: 1500, readings: { Fe: 50, Cu: 7, Ca: 3900, Zn: 300, P: 950, Si: 4 } });
    const doubt = run([...healthy, foreign]);
    const limit = doubt.at(foreign.sampleId).findings.find((f) => f.rule === 'limit')!;
    expect(limit).toMatchObject({ severity: 'caution', disposition: 'held' });

    const confirmed = run([...healthy, foreign], { [foreign.sampleId]: 'confirmed' });
    expect(confirmed.sampling(foreign.sampleId)).toEqual([]);
    expect(confirmed.at(foreign.sampleId).status).toBe('confirmed');
    expect(confirmed.at(foreign.sampleId).findings.find((f) => f.rule === 'limit')).toMatchObject({ disposition: 'incident' });

    const rejected = run([...healthy, foreign], { [foreign.sampleId]: 'rejected' });
    expect(rejected.at(foreign.sampleId)).toMatchObject({ status: 'rejected', findings: [] });
  });

  it('a fault of the whole sample is about the sample, not about the metal it is filed under; a fault of one metal names that metal', () => {
    const healthy = charge([10, 20, 30, 40, 50]);
    // Readings in the stored (alphabetical) order, as the fault was met: Cu comes before Fe.
    const stored = (s: Sample): Sample => ({ ...s, readings: Object.fromEntries(Object.entries(s.readings).sort(([a], [b]) => (a < b ? -1 : 1))) });
    const only = (s: Sample, check: string) => {
      const found = run([...healthy, s].map(stored)).sampling(s.sampleId).filter((f) => f.check === check);
      expect(found).toHaveLength(1);
      return found[0]!;
    };
    const readings = { Fe: 38, Cu: 7, Ca: 2400, Zn: 1100, P: 950, Si: 4 };
    const wholeSample = [
      only(sample(60, { sampleId: 'S-TWIN', unitHours: 2250, oilHours: 1250, readings: { Fe: 32, Cu: 6, Ca: 2400, Zn: 1100, P: 950, Si: 4 } }), 'duplicate-bottle'),
      only(sample(60, { unitHours: 1500, oilHours: 1500, readings }), 'unit-hours-back'),
      only(sample(60, { unitHours: 2500, oilHours: 40, readings: { ...readings, Fe: 32, Cu: 6 } }), 'oil-hours-back'),
      only(sample(60, { unitHours: 2500, oilHours: 1500, readings: { Fe: 1, Cu: '<1', Ca: 2400, Zn: 1100, P: 950, Si: 4 } }), 'new-oil-mid-charge'),
      only(sample(60, { unitHours: 2500, oilHours: 1500, readings: { ...readings, Ca: 3900, Zn: 300 } }), 'foreign-oil'),
    ];
    for (const f of wholeSample) {
      expect(sampleWide(f), f.check).toBe(true);
      expect(subjectOf(f), f.check).toBe('sample');
    }
    // The two that were filed under copper say nothing of copper or of any other metal.
    const [twin, back] = wholeSample;
    expect(twin!.measurand).toBe('Cu');
    expect(back!.measurand).toBe('Cu');
    for (const f of [twin!, back!]) expect(f.explanation).not.toMatch(/\b(Cu|Fe)\b/);
    // A single metal far below the charge, and a falling wear rate, are about that metal.
    const drop = only(sample(60, { unitHours: 2500, oilHours: 1500, readings: { ...readings, Fe: 9 } }), 'reading-drop');
    expect(subjectOf(drop)).toBe('Fe');
    expect(subjectOf({ measurand: 'Fe', rule: 'sampling', check: 'rate-fall' })).toBe('Fe');
    expect(subjectOf({ measurand: 'Cu', rule: 'limit' })).toBe('Cu');
  });

  it('a healthy charge raises no sampling finding', () => {
    const { ev } = run(charge([10, 20, 30, 40, 50, 60, 70, 80]));
    expect(ev.steps.flatMap((s) => s.findings).filter((f) => f.rule === 'sampling')).toEqual([]);
    expect(ev.steps.every((s) => s.status === undefined)).toBe(true);
  });
});
