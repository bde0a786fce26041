/**
 * The documented noise model behind calibration tests, the detection benchmark and the demo fleet.
 *
 * Between samples the level of each wear metal on the charge grows by rate·h plus a wear-process disturbance
 * with variance processVariance·h; make-up oil of T litres into a sump of V litres first scales the level by
 * (1 − T/V); at an oil change, made right after a sample, the level falls to residualFraction × the level then.
 * Each reading adds lab noise with standard deviation sqrt(absolute² + (relative·level)²) and is never negative.
 * Sampling intervals are irregular: uniform within ±jitter of the nominal interval. A step multiplies a metal's
 * wear rate by `factor` from `atHours` unit hours on.
 */
import type { ResultEvent } from '../domain/event.ts';
import type { Random } from './random.ts';

export interface MetalModel {
  /** Wear rate in ppm per hour. */
  readonly rate: number;
  /** Variance of the wear process per hour, ppm²/h. */
  readonly processVariance: number;
  readonly step?: { readonly atHours: number; readonly factor: number };
}

export interface SampleContext {
  readonly index: number;
  readonly unitHours: number;
  readonly oilHours: number;
  readonly oilChanged: boolean;
}

export interface WearSeriesOptions {
  readonly unit: string;
  readonly component: string;
  readonly group?: string;
  readonly samples: number;
  readonly metals: Readonly<Record<string, MetalModel>>;
  readonly labNoise: { readonly absolute: number; readonly relative: number };
  readonly intervalHours: number;
  /** Relative half-width of the uniform spread of intervals (0.4: 60 %–140 % of nominal). */
  readonly jitter: number;
  /** Oil change every this many oil hours (Infinity: never). */
  readonly drainHours: number;
  readonly residualFraction: number;
  readonly sumpLitres: number;
  /** Make-up oil per 100 operating hours, litres. */
  readonly topUpPer100h: number;
  readonly startTime: number;
  /** Unit hours on the meter at the start. */
  readonly startUnitHours?: number;
  /** Decimal places of the reported wear-metal readings. */
  readonly decimals: number;
  readonly sampleIdPrefix?: string;
  /** Further readings of a sample (oil condition, contaminants, cleanliness). */
  readonly extraReadings?: (ctx: SampleContext, rng: Random) => Record<string, number | string>;
}

export interface SimulatedSample {
  readonly event: ResultEvent;
  /** The true (noise-free) levels and rates at the sample. */
  readonly trueLevels: Readonly<Record<string, number>>;
  readonly trueRates: Readonly<Record<string, number>>;
}

const HOUR_MS = 3_600_000;

export function simulateWearSeries(o: WearSeriesOptions, rng: Random): SimulatedSample[] {
  const out: SimulatedSample[] = [];
  const metals = Object.entries(o.metals);
  const levels: Record<string, number> = Object.fromEntries(metals.map(([m]) => [m, 0]));
  let unitHours = 0;
  let oilHours = 0;
  for (let n = 0; n < o.samples; n++) {
    const h = n === 0 ? o.intervalHours : o.intervalHours * rng.uniform(1 - o.jitter, 1 + o.jitter);
    const changed = n > 0 && oilHours + h > o.drainHours;
    const topUp = changed ? 0 : Math.round(((o.topUpPer100h * h) / 100) * 10) / 10;
    // The oil is changed right after the previous sample, as sites do when they sample at the drain.
    const carry = changed ? o.residualFraction : 1 - Math.min(1, topUp / o.sumpLitres);
    for (const [m, model] of metals) {
      const rate = rateAt(model, unitHours + h / 2);
      levels[m] = carry * levels[m]! + rate * h + Math.sqrt(model.processVariance * h) * rng.normal();
    }
    oilHours = changed ? h : oilHours + h;
    unitHours += h;
    const scale = 10 ** o.decimals;
    const readings: Record<string, number | string> = {};
    for (const [m] of metals) {
      const level = levels[m]!;
      const sd = Math.sqrt(o.labNoise.absolute ** 2 + (o.labNoise.relative * level) ** 2);
      readings[m] = Math.max(0, Math.round((level + sd * rng.normal()) * scale) / scale);
    }
    const ctx: SampleContext = { index: n, unitHours, oilHours, oilChanged: changed };
    Object.assign(readings, o.extraReadings?.(ctx, rng));
    out.push({
      trueLevels: { ...levels },
      trueRates: Object.fromEntries(metals.map(([m, model]) => [m, rateAt(model, unitHours)])),
      event: {
        sampleId: `${o.sampleIdPrefix ?? `${o.unit}-${o.component}`}-${String(n + 1).padStart(4, '0')}`,
        unit: o.unit,
        component: o.component,
        ...(o.group !== undefined && { group: o.group }),
        sampledAt: new Date(o.startTime + unitHours * HOUR_MS).toISOString(),
        unitHours: Math.round((o.startUnitHours ?? 0) + unitHours),
        oilHours: Math.round(oilHours),
        oilChanged: changed,
        topUpLitres: topUp,
        readings,
      },
    });
  }
  return out;
}

function rateAt(model: MetalModel, unitHours: number): number {
  return model.step !== undefined && unitHours >= model.step.atHours ? model.rate * model.step.factor : model.rate;
}
