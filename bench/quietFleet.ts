/**
 * The invented fleets of the `quiet` benchmark part (quiet.ts): gearboxes and diesel engines with what makes a real
 * fleet hard to judge with built-in defaults, and the wear changes and sampling faults injected into them.
 *
 * Per component and wear metal the level on the charge grows by rate·h plus a wear-process disturbance of variance
 * `processVariancePerRate`·rate·h; make-up oil of T litres into a sump of V litres scales the level by (1 − T/V) first;
 * at an oil change (made right after a sample) the level falls to `residualFraction` of the level then. Each reading
 * adds lab noise sqrt(1² + (0.05·level)²) ppm and is never negative; below the detection limit (1 ppm) the lab reports
 * "<1". Per unit:
 * - each metal's in-control rate is the fleet's rate times a lognormal factor with mean 1 and a 40 % coefficient of
 *   variation (unit-to-unit spread);
 * - contaminants (Si as dirt, Na) stay at a steady level of the unit's own (lognormal, 30 % spread), plus lab noise;
 * - additives stay at the oil's level (lab noise 5 %); the engines add soot, water and fuel dilution at healthy levels;
 * - intervals are irregular (uniform within ±40 % of 250 h); the configuration knows neither the sump volume nor the
 *   fleet's residual fraction (built-in defaults).
 *
 * A wear change multiplies one metal's rate from `atHours` unit hours on: a step by `factor` at once, a ramp rising
 * linearly to `factor` over `rampHours`. All of it is invented; nothing here describes a real fleet.
 */
import type { ResultEvent } from '../src/domain/event.ts';
import { seededRandom, type Random } from '../src/simulation/random.ts';

export type FleetKindName = 'gearbox' | 'engine';

export interface FleetKind {
  readonly name: FleetKindName;
  readonly component: string;
  /** Population mean wear rates, ppm per operating hour. */
  readonly metals: Readonly<Record<string, number>>;
  /** Steady contaminant levels (population mean, ppm). */
  readonly contaminants: Readonly<Record<string, number>>;
  /** The oil's additive levels, ppm. */
  readonly additives: Readonly<Record<string, number>>;
  readonly drainHours: number;
  readonly residualFraction: number;
  readonly sumpLitres: number;
  readonly topUpPer100h: number;
  /** Further healthy readings of the oil (engines: soot %, water ppm, fuel %): mean and one standard deviation. */
  readonly extras: Readonly<Record<string, { readonly mean: number; readonly sd: number; readonly decimals: number }>>;
}

export const GEARBOXES: FleetKind = {
  name: 'gearbox',
  component: 'gearbox',
  metals: { Fe: 0.04, Cu: 0.008, Cr: 0.0015, Ni: 0.002, Sn: 0.001 },
  contaminants: { Si: 8, Na: 3 },
  additives: { P: 350, Zn: 40, Ca: 60, B: 120 },
  drainHours: 2000,
  residualFraction: 0.15,
  sumpLitres: 200,
  topUpPer100h: 1,
  extras: { water: { mean: 120, sd: 30, decimals: 0 } },
};

export const ENGINES: FleetKind = {
  name: 'engine',
  component: 'engine',
  metals: { Fe: 0.06, Cu: 0.012, Al: 0.008, Cr: 0.004, Pb: 0.0025, Sn: 0.001 },
  contaminants: { Si: 10, Na: 4 },
  additives: { Ca: 2800, Zn: 1150, P: 1050, Mg: 20 },
  drainHours: 500,
  residualFraction: 0.12,
  sumpLitres: 40,
  topUpPer100h: 0.4,
  extras: { soot: { mean: 0.5, sd: 0.12, decimals: 2 }, water: { mean: 150, sd: 40, decimals: 0 }, fuel: { mean: 0.6, sd: 0.2, decimals: 1 } },
};

export const FLEET_KINDS: Readonly<Record<FleetKindName, FleetKind>> = { gearbox: GEARBOXES, engine: ENGINES };

/** Unit-to-unit spread of the in-control wear rates (coefficient of variation of a lognormal factor). */
export const RATE_CV = 0.4;
const CONTAMINANT_CV = 0.3;
/** The wear process adds a variance of this times the in-control rate per operating hour (ppm²). */
export const PROCESS_VARIANCE_PER_RATE = 0.4;
/** Lab noise: one standard deviation sqrt(absolute² + (relative·level)²) ppm. */
export const LAB_NOISE = { absolute: 1, relative: 0.05 } as const;
const DETECTION_LIMIT = 1;
const INTERVAL_HOURS = 250;
const JITTER = 0.4;
const START = Date.parse('2022-01-03T06:00:00Z');
const HOUR_MS = 3_600_000;

export interface WearChange {
  readonly measurand: string;
  readonly shape: 'step' | 'ramp';
  readonly factor: number;
  /** Unit hours the change starts at. */
  readonly atHours: number;
  /** For a ramp: hours from the start to the full factor. */
  readonly rampHours?: number;
}

export interface ComponentPlan {
  readonly kind: FleetKind;
  readonly fleetSeed: number;
  readonly index: number;
  readonly group: string;
  readonly samples: number;
  readonly change?: WearChange;
}

export interface SimulatedUnit {
  readonly unit: string;
  readonly component: string;
  readonly group: string;
  readonly kind: FleetKindName;
  readonly events: ResultEvent[];
  /** True (noise-free) wear-metal levels at every sample. */
  readonly trueLevels: readonly Readonly<Record<string, number>>[];
  /** Exact unit hours of every sample. */
  readonly hours: readonly number[];
  readonly rates: Readonly<Record<string, number>>;
}

export function unitName(kind: FleetKind, fleetSeed: number, index: number): string {
  return `${kind.name === 'gearbox' ? 'GB' : 'EN'}${fleetSeed}-${String(index + 1).padStart(4, '0')}`;
}

/**
 * One component; the same plan always gives the same component, and a plan with a change gives exactly the sampling
 * times and noise draws of the same plan without it (every draw happens whatever the rates).
 */
export function simulateUnit(plan: ComponentPlan): SimulatedUnit {
  const { kind } = plan;
  const unit = unitName(kind, plan.fleetSeed, plan.index);
  const traits = seededRandom(mix(plan.fleetSeed, kind.name === 'gearbox' ? 1 : 2, plan.index, 1));
  const rng = seededRandom(mix(plan.fleetSeed, kind.name === 'gearbox' ? 1 : 2, plan.index, 2));
  const rates = Object.fromEntries(Object.entries(kind.metals).map(([m, r]) => [m, r * lognormal(traits, RATE_CV)]));
  const dirt = Object.fromEntries(Object.entries(kind.contaminants).map(([m, c]) => [m, c * lognormal(traits, CONTAMINANT_CV)]));
  const levels: Record<string, number> = Object.fromEntries(Object.keys(rates).map((m) => [m, 0]));
  const events: ResultEvent[] = [];
  const trueLevels: Record<string, number>[] = [];
  const hours: number[] = [];
  let unitHours = 0;
  let oilHours = 0;
  for (let n = 0; n < plan.samples; n++) {
    const h = n === 0 ? INTERVAL_HOURS : INTERVAL_HOURS * rng.uniform(1 - JITTER, 1 + JITTER);
    const changed = n > 0 && oilHours + h > kind.drainHours;
    const topUp = changed ? 0 : Math.round(((kind.topUpPer100h * h) / 100) * 10) / 10;
    const carry = changed ? kind.residualFraction : 1 - Math.min(1, topUp / kind.sumpLitres);
    for (const [m, base] of Object.entries(rates)) {
      const rate = base * multiplier(plan.change, m, unitHours + h / 2);
      levels[m] = Math.max(0, carry * levels[m]! + rate * h + Math.sqrt(PROCESS_VARIANCE_PER_RATE * base * h) * rng.normal());
    }
    oilHours = changed ? h : oilHours + h;
    unitHours += h;
    const readings: Record<string, number | string> = {};
    for (const m of Object.keys(rates)) readings[m] = labReading(levels[m]!, rng);
    for (const [m, c] of Object.entries(dirt)) readings[m] = labReading(c, rng);
    for (const [m, c] of Object.entries(kind.additives)) readings[m] = Math.round(c * (1 + LAB_NOISE.relative * rng.normal()));
    for (const [m, e] of Object.entries(kind.extras)) readings[m] = round(Math.max(0, e.mean + e.sd * rng.normal()), e.decimals);
    trueLevels.push({ ...levels });
    hours.push(unitHours);
    events.push({
      sampleId: `${unit}-${String(n + 1).padStart(4, '0')}`,
      unit,
      component: kind.component,
      group: plan.group,
      sampledAt: new Date(START + unitHours * HOUR_MS).toISOString(),
      unitHours: Math.round(unitHours),
      oilHours: Math.round(oilHours),
      oilChanged: changed,
      topUpLitres: topUp,
      readings,
    });
  }
  return { unit, component: kind.component, group: plan.group, kind: kind.name, events, trueLevels, hours, rates };
}

/** A reading as the lab reports it: one decimal, "<1" below the detection limit. */
export function labReading(level: number, rng: Random): number | string {
  const sd = Math.sqrt(LAB_NOISE.absolute ** 2 + (LAB_NOISE.relative * level) ** 2);
  const x = Math.max(0, Math.round((level + sd * rng.normal()) * 10) / 10);
  return x < DETECTION_LIMIT ? `<${DETECTION_LIMIT}` : x;
}

/** Readings of new oil of a fleet kind: wear metals near zero, a little dirt, the oil's additives. */
export function newOilReadings(kind: FleetKind, rng: Random): Record<string, number | string> {
  const readings: Record<string, number | string> = {};
  for (const m of Object.keys(kind.metals)) readings[m] = labReading(0.3 * rng.next(), rng);
  for (const m of Object.keys(kind.contaminants)) readings[m] = labReading(1 + rng.next(), rng);
  for (const [m, c] of Object.entries(kind.additives)) readings[m] = Math.round(c * (1 + LAB_NOISE.relative * rng.normal()));
  for (const [m, e] of Object.entries(kind.extras)) readings[m] = round(Math.max(0, 0.2 * e.mean), e.decimals);
  return readings;
}

function multiplier(change: WearChange | undefined, m: string, unitHours: number): number {
  if (change === undefined || change.measurand !== m || unitHours < change.atHours) return 1;
  if (change.shape === 'step') return change.factor;
  const share = Math.min(1, (unitHours - change.atHours) / (change.rampHours ?? 1));
  return 1 + (change.factor - 1) * share;
}

function lognormal(rng: Random, cv: number): number {
  const sigma = Math.sqrt(Math.log(1 + cv ** 2));
  return Math.exp(sigma * rng.normal() - sigma ** 2 / 2);
}

function round(x: number, decimals: number): number {
  const s = 10 ** decimals;
  return Math.round(x * s) / s;
}

/** Seeds of distinct streams; FNV-1a over the words. */
export function mix(...words: number[]): number {
  let h = 2166136261;
  for (const w of words) {
    for (let shift = 0; shift < 32; shift += 8) h = Math.imul(h ^ ((w >>> shift) & 0xff), 16777619);
  }
  return h >>> 0;
}
