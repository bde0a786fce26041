/**
 * The demo fleet: an invented water utility with pumping stations, prime-power generator sets and press
 * hydraulics, 15 components over 18 months. All names are made up. Three components carry a story:
 * - PS2-P3 gearbox: its iron and copper wear rate triples partway (a bearing starting to go);
 * - GEN-3 engine: a coolant leak — sodium and potassium creep up, then glycol appears;
 * - PR-2 hydraulic: the filter is bypassing — cleanliness drifts above its ISO 4406 target.
 * The rest stay in control. The feed also carries a late result and a corrected revision, as real feeds do.
 */
import type { ResultEvent } from '../domain/event.ts';
import { seededRandom, type Random } from '../simulation/random.ts';
import { simulateWearSeries, type SampleContext, type WearSeriesOptions } from '../simulation/wearSeries.ts';

export const DEMO_START = Date.parse('2025-06-02T07:00:00Z');
const MONTHS = 18;
const HOURS = MONTHS * 730;

export interface DemoResult {
  readonly event: ResultEvent;
  /** When the lab's report reaches the feed: a few days after sampling; the late one much later. */
  readonly reportedAt: number;
}

export interface DemoStory {
  readonly unit: string;
  readonly component: string;
  readonly what: string;
  /** Unit hours from which the fault develops. */
  readonly fromHours: number;
}

export const DEMO_STORIES: readonly DemoStory[] = [
  { unit: 'PS2-P3', component: 'gearbox', what: 'iron and copper wear rate triples (bearing distress)', fromHours: 7000 },
  { unit: 'GEN-3', component: 'engine', what: 'coolant leak: Na, K rising, then glycol', fromHours: 6500 },
  { unit: 'PR-2', component: 'hydraulic', what: 'cleanliness drifting above its 17/15/12 target (filter bypass)', fromHours: 5000 },
];

const GEARBOX: Omit<WearSeriesOptions, 'unit' | 'component' | 'samples' | 'metals'> = {
  group: 'pump-gearboxes',
  labNoise: { absolute: 1, relative: 0.05 },
  intervalHours: 250,
  jitter: 0.3,
  drainHours: 2000,
  residualFraction: 0.15,
  sumpLitres: 60,
  topUpPer100h: 0.3,
  startTime: DEMO_START,
  decimals: 0,
};

const ENGINE: typeof GEARBOX = { ...GEARBOX, group: 'prime-power-engines', drainHours: 500, residualFraction: 0.1, sumpLitres: 120, topUpPer100h: 1.5 };
const HYDRAULIC: typeof GEARBOX = { ...GEARBOX, group: 'press-hydraulics', intervalHours: 500, drainHours: 6000, residualFraction: 0.3, sumpLitres: 400, topUpPer100h: 0.5 };

function jitterValue(rng: Random, centre: number, spread: number, decimals = 1): number {
  const scale = 10 ** decimals;
  return Math.round((centre + spread * rng.normal()) * scale) / scale;
}

function gearbox(unit: string, seed: number, faulty: boolean): WearSeriesOptions {
  const rng = seededRandom(seed);
  const fe = 0.02 * (0.8 + 0.4 * rng.next());
  const cu = 0.006 * (0.8 + 0.4 * rng.next());
  const step = faulty ? { atHours: DEMO_STORIES[0]!.fromHours, factor: 3 } : undefined;
  return {
    ...GEARBOX,
    unit,
    component: 'gearbox',
    startUnitHours: 20_000 + (seed % 100) * 1370,
    samples: Math.floor(HOURS / GEARBOX.intervalHours),
    metals: {
      Fe: { rate: fe, processVariance: (0.1 * fe) ** 2 * 250, ...(step && { step }) },
      Cu: { rate: cu, processVariance: (0.1 * cu) ** 2 * 250, ...(step && { step }) },
      Cr: { rate: 0.0008, processVariance: 0.0001 },
    },
    extraReadings: (_ctx, r) => ({ Si: jitterValue(r, 4, 0.8, 0), v40: jitterValue(r, 221, 3), water: Math.max(20, Math.round(120 + 40 * r.normal())) }),
  };
}

function engine(unit: string, seed: number, leaking: boolean): WearSeriesOptions {
  const rng = seededRandom(seed);
  const fe = 0.05 * (0.8 + 0.4 * rng.next());
  const leakFrom = DEMO_STORIES[1]!.fromHours;
  const extra = (ctx: SampleContext, r: Random): Record<string, number | string> => {
    const leak = leaking && ctx.unitHours > leakFrom ? (ctx.unitHours - leakFrom) / 1000 : 0;
    const fraction = ctx.oilHours / ENGINE.drainHours;
    return {
      Si: jitterValue(r, 6, 1, 0),
      Na: Math.max(0, Math.round(3 + 1 * r.normal() + 18 * leak)),
      K: Math.max(0, Math.round(1 + 0.5 * r.normal() + 9 * leak)),
      glycol: leak > 1.2 ? jitterValue(r, 0.1 * leak, 0.02, 2) : '<0.05',
      tbn: jitterValue(r, 10.3 - 2.0 * fraction, 0.2),
      v100: jitterValue(r, 14.2 + 0.6 * fraction + (leak > 1 ? 1.2 * leak : 0), 0.15),
      soot: jitterValue(r, 0.2 + 0.9 * fraction, 0.05, 2),
      fuel: Math.max(0, jitterValue(r, 0.6, 0.2)),
      water: Math.max(50, Math.round(200 + 60 * r.normal() + 900 * leak)),
    };
  };
  return {
    ...ENGINE,
    unit,
    component: 'engine',
    startUnitHours: 8_000 + (seed % 100) * 910,
    samples: Math.floor(HOURS / ENGINE.intervalHours),
    metals: {
      Fe: { rate: fe, processVariance: (0.1 * fe) ** 2 * 250 },
      Cu: { rate: 0.01, processVariance: 0.0004 },
      Al: { rate: 0.008, processVariance: 0.0003 },
      Cr: { rate: 0.004, processVariance: 0.0001 },
      Pb: { rate: 0.006, processVariance: 0.0002 },
      Sn: { rate: 0.002, processVariance: 0.0001 },
    },
    extraReadings: extra,
  };
}

function hydraulic(unit: string, seed: number, bypassing: boolean): WearSeriesOptions {
  const driftFrom = DEMO_STORIES[2]!.fromHours;
  return {
    ...HYDRAULIC,
    unit,
    component: 'hydraulic',
    startUnitHours: 30_000 + (seed % 100) * 530,
    samples: Math.floor(HOURS / HYDRAULIC.intervalHours),
    metals: { Fe: { rate: 0.004, processVariance: 0.0004 }, Cu: { rate: 0.002, processVariance: 0.0001 } },
    extraReadings: (ctx, r) => {
      const drift = bypassing && ctx.unitHours > driftFrom ? (ctx.unitHours - driftFrom) / 2200 : 0;
      // Counts per mL at ≥4, ≥6 and ≥14 µm(c); each doubling is one ISO 4406 code step.
      const base = 2 ** (drift + 0.2 * r.normal());
      return {
        p4: Math.round(450 * base),
        p6: Math.round(120 * base),
        p14: Math.round(11 * base),
        Si: jitterValue(r, 3, 0.6, 0),
        v40: jitterValue(r, 46, 0.8),
        water: Math.max(20, Math.round(90 + 30 * r.normal())),
      };
    },
  };
}

/** The whole feed in the order the lab reports reach it. Deterministic for a seed. */
export function demoFleet(seed = 7): DemoResult[] {
  const specs: WearSeriesOptions[] = [
    ...['PS1-P1', 'PS1-P2', 'PS1-P3', 'PS1-P4', 'PS2-P1', 'PS2-P2', 'PS2-P3', 'PS2-P4'].map((u, i) => gearbox(u, seed * 100 + i, u === 'PS2-P3')),
    ...['GEN-1', 'GEN-2', 'GEN-3', 'GEN-4'].map((u, i) => engine(u, seed * 200 + i, u === 'GEN-3')),
    ...['PR-1', 'PR-2', 'PR-3'].map((u, i) => hydraulic(u, seed * 300 + i, u === 'PR-2')),
  ];
  const rng = seededRandom(seed);
  const results: DemoResult[] = [];
  for (const [n, spec] of specs.entries()) {
    const series = simulateWearSeries({ ...spec, sampleIdPrefix: `NQ${String(n + 1).padStart(2, '0')}` }, seededRandom(seed * 1000 + n));
    for (const s of series) {
      results.push({ event: s.event, reportedAt: Date.parse(s.event.sampledAt) + (2 + 4 * rng.next()) * 86_400_000 });
    }
  }
  markLateAndCorrected(results);
  return results.sort((a, b) => a.reportedAt - b.reportedAt);
}

/**
 * One healthy gearbox result reaches the feed five weeks late (a lost courier parcel); one engine result is
 * re-issued two days later with a corrected iron reading (revision 1), as labs do after a re-run.
 */
function markLateAndCorrected(results: DemoResult[]): void {
  const late = results.findIndex((r) => r.event.unit === 'PS1-P2' && r.event.sampleId.endsWith('-0020'));
  if (late >= 0) results[late] = { ...results[late]!, reportedAt: results[late]!.reportedAt + 35 * 86_400_000 };
  const original = results.find((r) => r.event.unit === 'GEN-2' && r.event.sampleId.endsWith('-0030'));
  if (original) {
    const readings = original.event.readings as Record<string, number | string>;
    const wrong = { ...readings, Fe: Number(readings['Fe']) * 4 };
    results.push({ event: { ...original.event, revision: 1, readings }, reportedAt: original.reportedAt + 2 * 86_400_000 });
    Object.assign(original, { event: { ...original.event, readings: wrong } });
  }
}
