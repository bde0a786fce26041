import { describe, expect, it } from 'vitest';
import { buildHistory } from '../../src/analysis/history.ts';
import { wearIntervals } from '../../src/analysis/intervals.ts';
import type { Sample } from '../../src/domain/event.ts';
import { sample, settingsFrom } from './history-fixtures.ts';

const SUMP_200 = settingsFrom(`
groups:
  - name: pump-gearboxes
    sumpLitres: 200
    residualFraction: 0.1
`);
const NO_SUMP = settingsFrom('');

const fe = (samples: Sample[], settings = SUMP_200) => wearIntervals(buildHistory(samples), 'Fe', settings);
const summary = (samples: Sample[], settings = SUMP_200) =>
  fe(samples, settings).map((i) => ({ to: i.to.sampleId, from: i.from?.sampleId, hours: i.hours, carryOver: i.carryOver, base: i.baseLevel, inc: i.increment, rate: i.rate }));

describe('wearIntervals: worked example (sump 200 L, residual 10 %)', () => {
  // Worked by hand with the mass balance of the design brief (§5):
  //   S1 → S2, same charge: 250 h; 20 L make-up keeps 1 − 20/200 = 0.9 of the 10 ppm: base 9 ppm;
  //            increment 20 − 9 = 11 ppm; rate 11/250 = 0.044 ppm/h (4.4 ppm per 100 h).
  //   S2 → S3, oil changed: 10 % residual of 20 ppm = base 2 ppm; 200 h on the new charge;
  //            increment 8 − 2 = 6 ppm; rate 6/200 = 0.03 ppm/h. The 5 L on the oil-change sample is not counted.
  //   S3 → S4, oil hours missing on S4: unit hours 1700 − 1500 = 200 h; 10 L keeps 0.95 of 8 ppm: base 7.6;
  //            increment 14 − 7.6 = 6.4 ppm; rate 0.032 ppm/h.
  //   S4 → S5, no make-up: base 14 ppm; unit hours 250 h (S4 has no oil hours); increment 8; rate 0.032 ppm/h.
  const history = [
    sample(0, { sampleId: 'S1', unitHours: 1000, oilHours: 100, readings: { Fe: 10 } }),
    sample(10, { sampleId: 'S2', unitHours: 1250, oilHours: 350, topUpLitres: 20, readings: { Fe: 20 } }),
    sample(20, { sampleId: 'S3', unitHours: 1500, oilHours: 200, oilChanged: true, topUpLitres: 5, readings: { Fe: 8 } }),
    sample(30, { sampleId: 'S4', unitHours: 1700, topUpLitres: 10, readings: { Fe: 14 } }),
    sample(40, { sampleId: 'S5', unitHours: 1950, oilHours: 650, readings: { Fe: 22 } }),
  ];

  it('matches the hand calculation', () => {
    const got = summary(history);
    const want = [
      { to: 'S2', from: 'S1', hours: 250, carryOver: 0.9, base: 9, inc: 11, rate: 0.044 },
      { to: 'S3', from: 'S2', hours: 200, carryOver: 0.1, base: 2, inc: 6, rate: 0.03 },
      { to: 'S4', from: 'S3', hours: 200, carryOver: 0.95, base: 7.6, inc: 6.4, rate: 0.032 },
      { to: 'S5', from: 'S4', hours: 250, carryOver: 1, base: 14, inc: 8, rate: 0.032 },
    ];
    expect(got).toHaveLength(want.length);
    got.forEach((g, i) => {
      const w = want[i]!;
      expect(g.to).toBe(w.to);
      expect(g.from).toBe(w.from);
      for (const k of ['hours', 'carryOver', 'base', 'inc', 'rate'] as const) expect(g[k]).toBeCloseTo(w[k], 10);
    });
  });

  it('marks charge boundaries', () => {
    const got = fe(history);
    expect(got.map((i) => [i.chargeIndex, i.firstOfCharge])).toEqual([
      [0, false],
      [1, true],
      [1, false],
      [1, false],
    ]);
    expect(got.every((i) => !i.censored && !i.runningIn)).toBe(true);
  });

  it('makes no make-up correction without a sump volume', () => {
    expect(summary(history, NO_SUMP)[0]).toMatchObject({ carryOver: 1, base: 10, inc: 10 });
  });

  it('caps the make-up share at the whole sump', () => {
    const got = summary([
      sample(0, { oilHours: 100, readings: { Fe: 10 } }),
      sample(10, { oilHours: 300, topUpLitres: 250, readings: { Fe: 4 } }),
    ]);
    expect(got[0]).toMatchObject({ carryOver: 0, base: 0, inc: 4 });
  });

  it('passes over samples without the measurand, keeping their make-up oil', () => {
    // 10 ppm × (1 − 20/200) × (1 − 10/200) = 10 × 0.9 × 0.95 = 8.55 ppm; 300 − 100 = 200 h.
    const got = summary([
      sample(0, { oilHours: 100, readings: { Fe: 10 } }),
      sample(5, { oilHours: 200, topUpLitres: 20, readings: { Cu: 3 } }),
      sample(10, { oilHours: 300, topUpLitres: 10, readings: { Fe: 12 } }),
    ]);
    expect(got).toHaveLength(1);
    expect(got[0]!.hours).toBe(200);
    expect(got[0]!.base).toBeCloseTo(8.55, 10);
  });
});

describe('wearIntervals: charges and component changes', () => {
  it('gives no interval for the first reading of the history', () => {
    expect(fe([sample(0, { oilHours: 250, readings: { Fe: 10 } })])).toEqual([]);
  });

  it('gives no first-of-charge interval when the previous charge never had the reading', () => {
    const got = fe([
      sample(0, { oilHours: 100, readings: { Cu: 3 } }),
      sample(10, { oilHours: 100, oilChanged: true, readings: { Fe: 5 } }),
      sample(20, { oilHours: 300, readings: { Fe: 9 } }),
    ]);
    expect(got.map((i) => i.to.sampledAt)).toEqual([sample(20, { readings: { Fe: 9 } }).sampledAt]);
  });

  it('starts from clean oil after a component change, running in', () => {
    const got = fe([
      sample(0, { sampleId: 'A', unitHours: 4800, oilHours: 500, readings: { Fe: 40 } }),
      sample(10, { sampleId: 'B', unitHours: 5000, oilHours: 20, oilChanged: true, componentChanged: true, readings: { Fe: 6 } }),
      sample(20, { sampleId: 'C', unitHours: 5250, oilHours: 270, readings: { Fe: 16 } }),
      sample(30, { sampleId: 'D', unitHours: 5500, oilHours: 520, readings: { Fe: 20 } }),
    ]);
    expect(got.map((i) => [i.to.sampleId, i.from?.sampleId, i.carryOver, i.baseLevel, i.hours, i.runningIn])).toEqual([
      ['B', 'A', 0, 0, 20, true],
      ['C', 'B', 1, 6, 250, true], // 5250 − 5000 = 250 h: still within the 250 h running-in (default)
      ['D', 'C', 1, 16, 250, false],
    ]);
    expect(got[0]!.rate).toBeCloseTo(6 / 20, 12);
  });

  it('treats a first sample that is a component change as running-in from clean oil', () => {
    const got = fe([
      sample(0, { sampleId: 'A', oilHours: 50, componentChanged: true, readings: { Fe: 4 } }),
      sample(10, { sampleId: 'B', oilHours: 200, readings: { Fe: 9 } }),
      sample(20, { sampleId: 'C', oilHours: 400, readings: { Fe: 12 } }),
    ]);
    // No unit hours: oil hours on the charge the change started count, 200 − 50 = 150 h ≤ 250, 400 − 50 = 350 h > 250.
    expect(got.map((i) => [i.to.sampleId, i.from?.sampleId, i.baseLevel, i.runningIn])).toEqual([
      ['A', undefined, 0, true],
      ['B', 'A', 4, true],
      ['C', 'B', 9, false],
    ]);
  });

  it('uses the configured running-in hours', () => {
    const settings = settingsFrom('detection:\n  runningInHours: 100\n');
    const got = fe(
      [
        sample(0, { unitHours: 0, oilHours: 0, componentChanged: true, readings: { Fe: 1 } }),
        sample(10, { unitHours: 100, oilHours: 100, readings: { Fe: 3 } }),
        sample(20, { unitHours: 101, oilHours: 101, readings: { Fe: 3 } }),
      ],
      settings,
    );
    expect(got.map((i) => i.runningIn)).toEqual([true, false]);
  });
});

describe('wearIntervals: censored and missing values', () => {
  it('uses the bound of a censored reading and marks the interval censored at both of its ends', () => {
    const got = fe([
      sample(0, { oilHours: 100, readings: { Fe: 3 } }),
      sample(10, { oilHours: 300, readings: { Fe: '<5' } }),
      sample(20, { oilHours: 500, readings: { Fe: 9 } }),
      sample(30, { oilHours: 700, readings: { Fe: 12 } }),
    ]);
    expect(got.map((i) => [i.level, i.baseLevel, i.censored])).toEqual([
      [5, 3, true],
      [9, 5, true],
      [12, 9, false],
    ]);
  });

  it('ignores a censored reading that carries nothing over', () => {
    const got = fe([
      sample(0, { oilHours: 300, readings: { Fe: '<1' } }),
      sample(10, { oilHours: 20, oilChanged: true, componentChanged: true, readings: { Fe: 4 } }),
    ]);
    expect(got.map((i) => [i.carryOver, i.censored])).toEqual([[0, false]]);
  });

  it('skips an interval whose hours are unknown or not positive, and goes on from its end', () => {
    const got = fe([
      sample(0, { sampleId: 'A', oilHours: 100, readings: { Fe: 3 } }),
      sample(10, { sampleId: 'B', readings: { Fe: 5 } }),
      sample(20, { sampleId: 'C', oilHours: 300, readings: { Fe: 7 } }),
      sample(30, { sampleId: 'D', oilHours: 300, readings: { Fe: 8 } }),
      sample(40, { sampleId: 'E', oilHours: 500, readings: { Fe: 9 } }),
      sample(50, { sampleId: 'F', oilChanged: true, readings: { Fe: 2 } }),
    ]);
    // A→B and B→C: no hours on B; C→D: 0 h; D→E: 200 h; E→F: new charge without oil hours.
    expect(got.map((i) => [i.from?.sampleId, i.to.sampleId, i.hours])).toEqual([['D', 'E', 200]]);
  });

  it('gives no intervals for measurands that are not wear metals', () => {
    const h = buildHistory([sample(0, { oilHours: 100, readings: { Si: 3 } }), sample(10, { oilHours: 300, readings: { Si: 9 } })]);
    expect(wearIntervals(h, 'Si', SUMP_200)).toEqual([]);
    expect(wearIntervals(h, 'Fe', SUMP_200)).toEqual([]);
  });
});
