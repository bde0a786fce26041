/**
 * The synthetic fleet of the benchmarks: like-for-like gearboxes whose iron wear follows the documented noise
 * model (src/simulation/wearSeries.ts), with what makes a real population hard to judge by one limit:
 *
 * - unit-to-unit spread: each component's in-control Fe wear rate is the population rate times a lognormal factor
 *   with mean 1 and coefficient of variation `rateCv` (30 %); its wear-process variance per hour scales with it
 *   (variance proportional to the mean, as for a count of wear events);
 * - lab noise: one standard deviation sqrt(absolute² + (relative · level)²), 1 ppm and 5 %;
 * - irregular intervals: uniform within ±40 % of the nominal 250 h;
 * - oil changes every 1000 oil hours, 10 % of the old charge staying behind; make-up oil 1 L per 100 h into 200 L;
 * - an optional step: the wear rate multiplied by `factor` from `atHours` unit hours on.
 *
 * A component's random stream does not depend on its rate or step (every draw happens whatever the values), so a
 * stepped component has exactly the sampling times and noise draws of its in-control twin.
 */
import { parseResultEvent, type Sample } from '../src/domain/event.ts';
import { seededRandom } from '../src/simulation/random.ts';
import { simulateWearSeries, type WearSeriesOptions } from '../src/simulation/wearSeries.ts';

export interface FleetModel {
  /** Population mean of the in-control Fe wear rate, ppm per hour. */
  readonly rate: number;
  /** Coefficient of variation of the in-control rate between components (lognormal). */
  readonly rateCv: number;
  /** Wear-process variance per hour per unit of rate (ppm²/h per ppm/h). */
  readonly processVariancePerRate: number;
  readonly series: Omit<WearSeriesOptions, 'unit' | 'component' | 'group' | 'samples' | 'metals' | 'sampleIdPrefix'>;
}

export const GROUP = 'bench-gearboxes';
export const COMPONENT = 'gearbox';
const HOUR_MS = 3_600_000;

export const FLEET_MODEL: FleetModel = {
  rate: 0.04,
  rateCv: 0.3,
  processVariancePerRate: 0.4,
  series: {
    labNoise: { absolute: 1, relative: 0.05 },
    intervalHours: 250,
    jitter: 0.4,
    drainHours: 1000,
    residualFraction: 0.1,
    sumpLitres: 200,
    topUpPer100h: 1,
    startTime: Date.parse('2022-01-03T06:00:00Z'),
    decimals: 1,
  },
};

/** The analysis configuration that matches the model: what a site that knows its sumps and lab would set. */
export const FLEET_CONFIG = `
detection:
  measurands: [Fe]
  runningInHours: 0
population:
  measurands: [Fe]
  bandHours: [0, 200, 400, 600, 800]
groups:
  - name: ${GROUP}
    sumpLitres: ${FLEET_MODEL.series.sumpLitres}
    residualFraction: ${FLEET_MODEL.series.residualFraction}
`;

export interface Step {
  readonly atHours: number;
  readonly factor: number;
}

export interface SimulatedComponent {
  readonly unit: string;
  /** Validated samples in time order. */
  readonly samples: readonly Sample[];
  /** Unit hours of every sample (exact, not rounded as in the event). */
  readonly hours: readonly number[];
  /** The component's own in-control Fe wear rate, ppm per hour. */
  readonly rate: number;
  readonly step?: Step;
}

export interface ComponentSpec {
  readonly fleetSeed: number;
  readonly index: number;
  readonly samples: number;
  /** Chooses the step from the in-control twin's sampling hours; absent: in control. */
  readonly step?: (hours: readonly number[], rng: () => number) => Step;
}

export function unitName(fleetSeed: number, index: number): string {
  return `B${fleetSeed}-${String(index + 1).padStart(4, '0')}`;
}

/** One component of a fleet; the same spec always gives the same component. */
export function simulateComponent(spec: ComponentSpec, model: FleetModel = FLEET_MODEL): SimulatedComponent {
  const unit = unitName(spec.fleetSeed, spec.index);
  const traits = seededRandom(mix(spec.fleetSeed, spec.index, 1));
  const sigma = Math.sqrt(Math.log(1 + model.rateCv ** 2));
  const rate = model.rate * Math.exp(sigma * traits.normal() - sigma ** 2 / 2);
  const metal = { rate, processVariance: model.processVariancePerRate * rate };
  const run = (metals: WearSeriesOptions['metals']) =>
    simulateWearSeries(
      { ...model.series, unit, component: COMPONENT, group: GROUP, samples: spec.samples, metals, sampleIdPrefix: unit },
      seededRandom(mix(spec.fleetSeed, spec.index, 2)),
    );
  let simulated = run({ Fe: metal });
  const hours = simulated.map((s) => (Date.parse(s.event.sampledAt) - model.series.startTime) / HOUR_MS);
  let step: Step | undefined;
  if (spec.step !== undefined) {
    step = spec.step(hours, () => traits.next());
    simulated = run({ Fe: { ...metal, step } });
  }
  const samples = simulated.map((s) => {
    const parsed = parseResultEvent(s.event);
    if (!parsed.ok) throw new Error(`simulated event ${s.event.sampleId} invalid: ${JSON.stringify(parsed.issues)}`);
    return parsed.sample;
  });
  return { unit, samples, hours, rate, ...(step !== undefined && { step }) };
}

export function simulateFleet(count: number, spec: Omit<ComponentSpec, 'index'>, model?: FleetModel): SimulatedComponent[] {
  return Array.from({ length: count }, (_, index) => simulateComponent({ ...spec, index }, model));
}

/** Seeds of distinct streams from (fleet, component, purpose); FNV-1a over the three words. */
function mix(...words: number[]): number {
  let h = 2166136261;
  for (const w of words) {
    for (let shift = 0; shift < 32; shift += 8) h = Math.imul(h ^ ((w >>> shift) & 0xff), 16777619);
  }
  return h >>> 0;
}
