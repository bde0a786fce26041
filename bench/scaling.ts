/**
 * Evaluation cost against history length. The worker re-evaluates a component's whole ordered history for every
 * evaluation (so that late and corrected results take their place), so the cost of one evaluation must grow no
 * faster than the history: per-sample time roughly flat, growth exponent about 1.
 *
 * The histories are realistic in width: seven wear metals (the default detection measurands), silicon, viscosity,
 * TBN and an ISO 4406 code per sample, every rule family on (fixed, rate and population limits, condition,
 * cleanliness, EWMA and CUSUM with limits derived from the default budget), a group with population bands and a
 * pooled baseline.
 */
import { evaluateComponent } from '../src/analysis/evaluate.ts';
import type { GroupStats } from '../src/analysis/model.ts';
import { populationBands, populationMeasurands } from '../src/analysis/populationStats.ts';
import { parseConfig } from '../src/domain/configFile.ts';
import { parseResultEvent, type Sample } from '../src/domain/event.ts';
import { resolveSettings } from '../src/domain/settings.ts';
import { seededRandom } from '../src/simulation/random.ts';
import { simulateWearSeries, type WearSeriesOptions } from '../src/simulation/wearSeries.ts';
import type { PartResult } from './report.ts';
import { fmt, growthExponent, median, round } from './stats.ts';

export interface ScalingOptions {
  /** History lengths (samples per component). Default [10, 100, 1000]. */
  lengths?: readonly number[];
  /** Distinct histories per length. Default 5. */
  histories?: number;
  /** Timed batches per history. Default 15. */
  batches?: number;
  /** Least duration of one timed batch, ms (short evaluations are repeated within a batch). Default 20. */
  batchMs?: number;
  seed?: number;
}

const GROUP = 'scaling-gearboxes';
/** Linear within the timing noise of a shared machine. */
const MAX_EXPONENT = 1.1;
const CONFIG = `
detection:
  runningInHours: 0
groups:
  - name: ${GROUP}
    sumpLitres: 120
    residualFraction: 0.1
    limits:
      Fe: { caution: 60, alarm: 100 }
      Si: { caution: 15, alarm: 25 }
    rateLimits:
      Fe: { caution: 8, alarm: 15 }
    newOil: { v100: 13.5, tbn: 8 }
    cleanliness: { target: "18/16/13" }
`;

const METALS: WearSeriesOptions['metals'] = {
  Fe: { rate: 0.04, processVariance: 0.016 },
  Cu: { rate: 0.01, processVariance: 0.004 },
  Al: { rate: 0.005, processVariance: 0.002 },
  Cr: { rate: 0.003, processVariance: 0.0012 },
  Pb: { rate: 0.006, processVariance: 0.0024 },
  Sn: { rate: 0.002, processVariance: 0.0008 },
  Ni: { rate: 0.002, processVariance: 0.0008 },
};

function history(samples: number, seed: number, unit: string): Sample[] {
  const events = simulateWearSeries(
    {
      unit,
      component: 'gearbox',
      group: GROUP,
      samples,
      metals: METALS,
      labNoise: { absolute: 1, relative: 0.05 },
      intervalHours: 250,
      jitter: 0.4,
      drainHours: 1000,
      residualFraction: 0.1,
      sumpLitres: 120,
      topUpPer100h: 0.5,
      startTime: Date.parse('2020-01-06T06:00:00Z'),
      decimals: 1,
      extraReadings: (_ctx, r) => ({
        Si: Math.round((5 + r.normal()) * 10) / 10,
        v100: Math.round((13.5 + 0.2 * r.normal()) * 100) / 100,
        tbn: Math.round((7.5 + 0.3 * r.normal()) * 10) / 10,
        iso4406: `${17 + Math.round(r.next())}/${15 + Math.round(r.next())}/12`,
      }),
    },
    seededRandom(seed),
  );
  return events.map(({ event }) => {
    const parsed = parseResultEvent(event);
    if (!parsed.ok) throw new Error(`simulated event ${event.sampleId} invalid: ${JSON.stringify(parsed.issues)}`);
    return parsed.sample;
  });
}

export function runScaling(options: ScalingOptions = {}): PartResult {
  const o = { lengths: [10, 100, 1000], histories: 5, batches: 15, batchMs: 20, seed: 1, ...options };
  const started = performance.now();
  const config = parseConfig(CONFIG, 'scaling benchmark');
  const settings = resolveSettings(config, { unit: 'scaling', component: 'gearbox', group: GROUP });
  const population = Array.from({ length: 40 }, (_, i) => history(60, o.seed * 1000 + 500 + i, `POP-${i}`)).flat();
  const group: GroupStats = {
    group: GROUP,
    bands: populationBands(population, settings.population, populationMeasurands(settings.population)),
    baselines: Object.fromEntries(Object.entries(METALS).map(([m, model]) => [m, { ...model, intervals: 400, components: 40 }])),
  };

  const cases = o.lengths.map((length) => {
    const histories = Array.from({ length: o.histories }, (_, h) => history(length, o.seed * 1000 + h, `SCALE-${length}-${h}`));
    const findings = histories.reduce((n, samples) => n + evaluateComponent(samples, settings, group).steps.reduce((k, s) => k + s.findings.length, 0), 0);
    // Repeat short evaluations so that one timed batch outlasts the timer's resolution and GC noise.
    const reps = histories.map((samples) => {
      const t0 = performance.now();
      evaluateComponent(samples, settings, group);
      return Math.max(1, Math.ceil(o.batchMs / Math.max(performance.now() - t0, 0.001)));
    });
    return { length, histories, reps, findings, perEvaluation: [] as number[] };
  });
  // Rounds visit every length in turn, so that a change in the load of a shared machine hits all lengths alike.
  for (let b = 0; b < o.batches; b++) {
    for (const c of cases) {
      c.histories.forEach((samples, h) => {
        const reps = c.reps[h]!;
        const start = performance.now();
        for (let r = 0; r < reps; r++) evaluateComponent(samples, settings, group);
        c.perEvaluation.push((performance.now() - start) / reps);
      });
    }
  }
  const results = cases.map((c) => {
    const ms = median(c.perEvaluation);
    return { length: c.length, msPerEvaluation: ms, usPerSample: (1000 * ms) / c.length, findingsPerHistory: c.findings / o.histories };
  });

  const rows = results.map((r, i) => {
    const prev = results[i - 1];
    const exponent = prev === undefined ? NaN : growthExponent(prev.length, prev.msPerEvaluation, r.length, r.msPerEvaluation);
    return { ...r, exponent };
  });
  const first = rows[0]!;
  const last = rows.at(-1)!;
  const overall = growthExponent(first.length, first.msPerEvaluation, last.length, last.msPerEvaluation);
  const seconds = (performance.now() - started) / 1000;
  // Judged end to end (shortest to longest history): neighbouring lengths are too close for a noisy shared machine.
  const linear = overall <= MAX_EXPONENT;
  return {
    name: 'scaling',
    json: {
      seconds: round(seconds, 3),
      measurands: Object.keys(METALS).length + 4,
      histories: o.histories,
      batches: o.batches,
      lengths: rows.map((r) => ({
        samples: r.length,
        msPerEvaluation: round(r.msPerEvaluation),
        usPerSample: round(r.usPerSample),
        growthExponentFromPrevious: round(r.exponent),
        findingsPerHistory: round(r.findingsPerHistory),
      })),
      overallGrowthExponent: round(overall),
      target: { overallGrowthExponentAtMost: MAX_EXPONENT, met: linear },
    },
    table: {
      columns: ['samples', 'ms / evaluation', 'µs / sample', 'exponent', 'findings'],
      rows: rows.map((r) => [String(r.length), fmt(r.msPerEvaluation), fmt(r.usPerSample), fmt(r.exponent), fmt(r.findingsPerHistory)]),
    },
    notes: [
      `median of ${o.histories} histories × ${o.batches} timed batches per length; 11 measurands per sample, every rule family on; ${fmt(seconds)} s`,
      `exponent: slope of log(time) against log(length) from the previous length (1 = linear, 2 = quadratic)`,
      `target: no worse than linear, per-sample time roughly flat (exponent from ${first.length} to ${last.length} samples ≤ ${MAX_EXPONENT}): ` +
        `${linear ? 'MET' : 'MISSED'} (${fmt(overall)}; per-sample time ×${fmt(last.usPerSample / first.usPerSample)})`,
      `a result costs one evaluation of the whole history in the worker, so a component's n-th result costs about n × the per-sample time`,
    ],
  };
}
