/**
 * A simulated fleet for the backtest tests (noise model of src/simulation/wearSeries.ts): eight gearboxes, three of
 * which get a known step of the iron wear rate (×2.5 from 6000 unit hours on), the rest in control. Every component
 * is its own group, so that nothing pools across components and each component's findings can be worked out on
 * its own with evaluateComponent, as the worker would have judged each sample on arrival.
 */
import type { ResultEvent } from '../../src/domain/event.ts';
import { seededRandom } from '../../src/simulation/random.ts';
import { simulateWearSeries } from '../../src/simulation/wearSeries.ts';
import { IN_CONTROL, steppedFe } from '../helpers/wearFleet.ts';

export const STEP_AT_HOURS = 6000;
export const STEPPED_UNITS = ['BT-1', 'BT-2', 'BT-3'];
export const IN_CONTROL_UNITS = ['BT-4', 'BT-5', 'BT-6', 'BT-7', 'BT-8'];
const SAMPLES = 44;

/** Fe limits far above the in-control level (about 45 ppm at the drain) and reached a few samples after the step. */
export const FLEET_CONFIG = `
detection:
  measurands: [Fe]
  labNoise: { absolute: 1, relative: 0.05 }
  runningInHours: 0
population:
  measurands: []
defaults:
  sumpLitres: 200
  residualFraction: 0.1
  limits:
    Fe: { caution: 70, alarm: 110 }
`;

/** The same fleet judged with EWMA only and a lower caution limit: for the side-by-side comparison. */
export const OTHER_CONFIG = `
detection:
  measurands: [Fe]
  labNoise: { absolute: 1, relative: 0.05 }
  runningInHours: 0
  cusum: { enabled: false }
population:
  measurands: []
defaults:
  sumpLitres: 200
  residualFraction: 0.1
  limits:
    Fe: { caution: 60, alarm: 110 }
`;

/** Every event of the fleet, in sample-time order across components, as a lab feed delivers them. */
export function fleetEvents(): ResultEvent[] {
  const units = [...STEPPED_UNITS, ...IN_CONTROL_UNITS];
  const events = units.flatMap((unit, i) =>
    simulateWearSeries(
      {
        ...IN_CONTROL,
        unit,
        component: 'gearbox',
        group: `bt-${unit}`,
        samples: SAMPLES,
        sampleIdPrefix: unit,
        ...(STEPPED_UNITS.includes(unit) && { metals: steppedFe(STEP_AT_HOURS, 2.5) }),
      },
      seededRandom(101 + i),
    ).map((s) => s.event),
  );
  return events.sort((a, b) => (a.sampledAt < b.sampledAt ? -1 : a.sampledAt > b.sampledAt ? 1 : 0));
}

export function fleetJsonl(): string {
  return fleetEvents().map((e) => JSON.stringify(e)).join('\n') + '\n';
}
