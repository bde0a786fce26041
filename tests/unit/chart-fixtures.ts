/** A small hand-computable gearbox history for the chart tests, evaluated by the real analysis core. */
import { evaluateComponent } from '../../src/analysis/evaluate.ts';
import type { BandStats, GroupStats } from '../../src/analysis/model.ts';
import { buildComponentSeries, type ComponentSeries } from '../../src/charts/componentSeries.ts';
import type { Sample } from '../../src/domain/event.ts';
import type { ComponentSettings } from '../../src/domain/settings.ts';
import { sample, settingsFrom } from './history-fixtures.ts';

/**
 * Without a sump volume no make-up correction applies, so on one charge the rate is simply rise over run
 * (common practice: ppm gained divided by the operating hours between samples on the same charge); after the oil
 * change 10 % of the old charge's level is carried over (the residual fraction of the group).
 */
export const CONFIG = `
detection:
  measurands: [Fe]
  runningInHours: 0
  baselineIntervals: 3
population:
  measurands: [Fe]
  minResults: 30
  bandHours: [0, 500]
groups:
  - name: pump-gearboxes
    residualFraction: 0.1
    limits:
      Fe: { caution: 40, alarm: 60 }
    rateLimits:
      Fe: { caution: 6, alarm: 12 }
`;

/** [day, oil hours, Fe, oil changed, Si] */
const ROWS: [number, number, number, boolean, number | string][] = [
  [10, 250, 5, false, 3],
  [20, 500, 10, false, '<1'],
  [30, 750, 15, false, 4],
  [40, 1000, 20, false, 4],
  [50, 250, 8, true, 5],
  [60, 500, 30, false, 5],
  [70, 750, 44, false, 6],
  [80, 1000, 70, false, 6],
];

export function fixtureSamples(): Sample[] {
  return ROWS.map(([day, oilHours, Fe, oilChanged, Si]) => sample(day, { oilHours, oilChanged, readings: { Fe, Si } }));
}

export function fixtureSettings(): ComponentSettings {
  return settingsFrom(CONFIG);
}

/**
 * Population statistics of the group: the 0–500 h band well populated (mean 4, sd 1.5: caution 5.5, alarm 7 at
 * mean + 1σ / + 2σ), the open band from 500 h too thin to be trusted (12 of the 30 results needed).
 */
export function fixtureGroup(): GroupStats {
  const bands: BandStats[] = [
    { fromHours: 0, toHours: 500, n: 40, mean: 4, sd: 1.5 },
    { fromHours: 500, toHours: null, n: 12, mean: 30, sd: 9 },
  ];
  return { group: 'pump-gearboxes', bands: { Fe: bands }, baselines: {} };
}

export function fixtureSeries(): { series: ComponentSeries; findings: ReturnType<typeof evaluateComponent>['steps'][number]['findings'] } {
  const settings = fixtureSettings();
  const group = fixtureGroup();
  const evaluation = evaluateComponent(fixtureSamples(), settings, group);
  return { series: buildComponentSeries(evaluation, settings, group), findings: evaluation.steps.flatMap((s) => s.findings) };
}
