/** Simulated component histories with the documented noise model (src/simulation/wearSeries.ts), for tests. */
import { parseResultEvent, type Sample } from '../../src/domain/event.ts';
import { seededRandom } from '../../src/simulation/random.ts';
import { simulateWearSeries, type WearSeriesOptions } from '../../src/simulation/wearSeries.ts';

export const IN_CONTROL: Omit<WearSeriesOptions, 'unit' | 'component' | 'samples'> = {
  group: 'sim-gearboxes',
  metals: { Fe: { rate: 0.04, processVariance: 0.016 } },
  labNoise: { absolute: 1, relative: 0.05 },
  intervalHours: 250,
  jitter: 0.4,
  drainHours: 1000,
  residualFraction: 0.1,
  sumpLitres: 200,
  topUpPer100h: 1,
  startTime: Date.parse('2024-01-01T00:00:00Z'),
  decimals: 1,
};

export const SIM_CONFIG = `
detection:
  measurands: [Fe]
  labNoise: { absolute: 1, relative: 0.05 }
  runningInHours: 0
groups:
  - name: sim-gearboxes
    sumpLitres: 200
    residualFraction: 0.1
`;

/** In-control Fe with a step of the wear rate by `factor` from `atHours` unit hours on. */
export function steppedFe(atHours: number, factor: number): WearSeriesOptions['metals'] {
  return { Fe: { ...IN_CONTROL.metals.Fe!, step: { atHours, factor } } };
}

export function simulatedSamples(options: Partial<WearSeriesOptions> & { samples: number }, seed: number): Sample[] {
  const rng = seededRandom(seed);
  return simulateWearSeries({ unit: `SIM-${seed}`, component: 'gearbox', ...IN_CONTROL, ...options }, rng).map((s) => {
    const parsed = parseResultEvent(s.event);
    if (!parsed.ok) throw new Error(`simulated event invalid: ${JSON.stringify(parsed.issues)}`);
    return parsed.sample;
  });
}
