import { describe, expect, it } from 'vitest';
import { cusumArl } from '../../src/analysis/arl/cusumArl.ts';
import { ewmaArl } from '../../src/analysis/arl/ewmaArl.ts';
import { changeBudgetShare, changeDesign, designConfiguredCharts, detectionLimits, parseBudget, targetArl } from '../../src/analysis/budget.ts';
import { BudgetSchema, ConfigSchema, DetectionSchema } from '../../src/domain/config.ts';
import { parseConfig } from '../../src/domain/configFile.ts';
import { InputError } from '../../src/domain/errors.ts';
import { resolveSettings } from '../../src/domain/settings.ts';

describe('parseBudget', () => {
  it('reads the documented forms', () => {
    expect(parseBudget('1 per component per 5 years')).toEqual({ alarms: 1, years: 5 });
    expect(parseBudget('2 per component per year')).toEqual({ alarms: 2, years: 1 });
    expect(parseBudget('  0.5 false alarms per component every 2 years ')).toEqual({ alarms: 0.5, years: 2 });
    expect(parseBudget('1 False Alarm per Component per 10 Years')).toEqual({ alarms: 1, years: 10 });
  });

  it('refuses anything else with an error that shows the expected form', () => {
    for (const bad of ['', 'once a year', '1 per unit per year', '1 per component per 5 months', '0 per component per year', '-1 per component per year', '1 per component per 0 years']) {
      expect(() => parseBudget(bad)).toThrow(InputError);
    }
    expect(() => parseBudget('once a year')).toThrow(/"once a year".*1 per component per 5 years/);
  });
});

describe('targetArl', () => {
  it('converts the budget into samples per false alarm, shared by the charts', () => {
    // 5 years × 8760 h / 250 h = 175.2 samples per component in the period; one false alarm allowed.
    const b = BudgetSchema.parse({ alarms: 1, years: 5, sampleIntervalHours: 250, hoursPerYear: 8760 });
    expect(targetArl(b, 1)).toBeCloseTo(175.2, 10);
    // 14 charts whose false-alarm rates add: each needs 14 times the component's run length.
    expect(targetArl(b, 14)).toBeCloseTo(175.2 * 14, 10);
    expect(targetArl({ ...b, alarms: 2, years: 1 }, 3)).toBeCloseTo(((8760 / 250) / 2) * 3, 10);
    expect(() => targetArl(b, 0)).toThrow(RangeError);
  });
});

describe('detectionLimits', () => {
  it('derives h and L from the default budget: the upper side of each chart (an upward signal opens an incident) meets the per-chart ARL0', () => {
    const d = DetectionSchema.parse({});
    const limits = detectionLimits(d);
    expect(limits.charts).toBe(d.measurands.length * 2);
    expect(limits.arl0).toBeCloseTo(targetArl(d.budget, limits.charts), 10);
    expect(cusumArl({ k: d.cusum.k, h: limits.cusumH, shift: 0, sided: 'one', headstart: d.cusum.headstart }) / limits.arl0).toBeCloseTo(1, 6);
    // The detectors draw exact time-varying limits, so L is designed for them.
    expect(ewmaArl({ lambda: d.ewma.lambda, L: limits.ewmaL, shift: 0, sided: 'one', exactLimits: true }) / limits.arl0).toBeCloseTo(1, 6);
  });

  it('gives the change detectors their share of the budget: a smaller share, a longer in-control run length per chart', () => {
    const d = DetectionSchema.parse({});
    const whole = detectionLimits(d);
    const part = detectionLimits(d, 0.8);
    expect(part.arl0).toBeCloseTo(whole.arl0 / 0.8, 8);
    expect(part.cusumH).toBeGreaterThan(whole.cusumH);
    expect(cusumArl({ k: d.cusum.k, h: part.cusumH, shift: 0, sided: 'one' }) / part.arl0).toBeCloseTo(1, 6);
    expect(() => detectionLimits(d, 0)).toThrow(RangeError);
  });

  it('keeps configured h and L, counts only enabled detectors, and designs one-sided charts for sided: up', () => {
    const given = detectionLimits(DetectionSchema.parse({ ewma: { L: 2.9 }, cusum: { h: 4.5 } }));
    expect(given.ewmaL).toBe(2.9);
    expect(given.cusumH).toBe(4.5);

    const cusumOnly = detectionLimits(DetectionSchema.parse({ measurands: ['Fe', 'Cu'], ewma: { enabled: false }, sided: 'up', cusum: { headstart: 0.5 } }));
    expect(cusumOnly.charts).toBe(2);
    expect(cusumArl({ k: 0.5, h: cusumOnly.cusumH, shift: 0, sided: 'one', headstart: 0.5 }) / cusumOnly.arl0).toBeCloseTo(1, 6);

    const none = detectionLimits(DetectionSchema.parse({ ewma: { enabled: false }, cusum: { enabled: false } }));
    expect(none.charts).toBe(0);
    expect(none.arl0).toBeCloseTo(targetArl(DetectionSchema.parse({}).budget, 1), 10);
  });

  it('splits the change detectors\' share between the rise side (wear incidents) and the fall side (sampling incidents), each side meeting its own run length', () => {
    const config = ConfigSchema.parse({});
    const design = changeDesign(config.detection, config.population);
    expect(design.riseShare + design.fallShare).toBeCloseTo(changeBudgetShare(config.population), 12);
    expect(design.fallShare).toBeCloseTo(changeBudgetShare(config.population) * config.detection.fallShare, 12);
    const fall = design.fall!;
    expect(fall.arl0 / design.rise.arl0).toBeCloseTo(design.riseShare / design.fallShare, 8);
    // Each side is a one-sided chart of its own: its in-control run length from the integral equations (analysis/arl).
    const d = config.detection;
    expect(cusumArl({ k: d.cusum.k, h: fall.cusumH, shift: 0, sided: 'one', headstart: d.cusum.headstart }) / fall.arl0).toBeCloseTo(1, 6);
    expect(ewmaArl({ lambda: d.ewma.lambda, L: fall.ewmaL, shift: 0, sided: 'one', exactLimits: true }) / fall.arl0).toBeCloseTo(1, 6);
    expect(fall.cusumH).toBeGreaterThan(design.rise.cusumH);
    // Upper side only: no fall side, the rise side has the whole share.
    const up = changeDesign(ConfigSchema.parse({ detection: { sided: 'up' } }).detection, config.population);
    expect(up.fall).toBeUndefined();
    expect(up.riseShare).toBe(changeBudgetShare(config.population));
  });

  it('answers a repeated design with the same limits (the solution is cached; its speed is in the benchmark)', () => {
    const d = DetectionSchema.parse({ ewma: { lambda: 0.15 } });
    const first = detectionLimits(d);
    for (let i = 0; i < 100; i++) expect(detectionLimits(d)).toEqual(first);
  });
});

describe('designConfiguredCharts', () => {
  it('designs the built-in settings and each group with its own budget, as its components will use them', () => {
    const config = parseConfig(`
groups:
  - name: strict-gearboxes
    detection: { budget: { alarms: 1, years: 20 } }
  - name: plain-engines
`);
    const designs = designConfiguredCharts(config);
    expect([...designs.keys()]).toEqual(['', 'strict-gearboxes', 'plain-engines']);
    const s = resolveSettings(config, { unit: 'X', component: 'gearbox', group: 'strict-gearboxes' });
    expect(designs.get('strict-gearboxes')).toEqual(changeDesign(s.detection, s.population));
    // Four times the period for one false alarm: a run length four times as long, so wider limits.
    expect(designs.get('strict-gearboxes')!.rise.arl0).toBeCloseTo(4 * designs.get('')!.rise.arl0, 6);
    expect(designs.get('strict-gearboxes')!.rise.cusumH).toBeGreaterThan(designs.get('')!.rise.cusumH);
    expect(designs.get('plain-engines')).toEqual(designs.get(''));
  });
});
