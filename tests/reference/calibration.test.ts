/**
 * Calibration of the change detectors on the documented noise model (src/simulation/wearSeries.ts):
 * in control, the observed run length to the first false signal must match the designed in-control ARL;
 * after a wear-rate step, the detectors must catch it, and the delay is reported.
 *
 * The designed ARLs come from the project's own Markov-chain design, which tests/reference/arl*.test.ts checks
 * against published tables (Lucas & Crosier 1982; Lucas & Saccucci 1990); this test closes the loop from the
 * design to the data.
 */
import { describe, expect, it } from 'vitest';
import { cusumDecisionInterval } from '../../src/analysis/arl/solveCusum.ts';
import { ewmaLimitWidth } from '../../src/analysis/arl/solveEwma.ts';
import { evaluateComponent } from '../../src/analysis/evaluate.ts';
import type { GroupStats } from '../../src/analysis/model.ts';
import { parseConfig } from '../../src/domain/configFile.ts';
import { resolveSettings } from '../../src/domain/settings.ts';
import { seededRandom } from '../../src/simulation/random.ts';
import { IN_CONTROL, SIM_CONFIG, simulatedSamples, steppedFe } from '../helpers/wearFleet.ts';

const seededNormal = (seed: number) => seededRandom(seed * 7919).normal();

const ARL0 = 100;
const SERIES = 300;
const LENGTH = 500;

function settingsFor(baselineIntervals: number) {
  const h = cusumDecisionInterval({ k: 0.5, arl0: ARL0, sided: 'two' });
  const L = ewmaLimitWidth({ lambda: 0.2, arl0: ARL0, sided: 'two', exactLimits: true });
  const config = parseConfig(`${SIM_CONFIG}\n`);
  const base = resolveSettings(config, { unit: 'SIM', component: 'gearbox', group: 'sim-gearboxes' });
  return {
    ...base,
    detection: { ...base.detection, baselineIntervals, cusum: { enabled: true, k: 0.5, h, headstart: 0 }, ewma: { enabled: true, lambda: 0.2, L } },
  };
}

/** The true in-control parameters, as a group baseline pooled from a large population would give them. */
const KNOWN: GroupStats = {
  group: 'sim-gearboxes',
  bands: {},
  baselines: { Fe: { ...IN_CONTROL.metals.Fe!, intervals: 10_000, components: 100 } },
};

/**
 * First step index (1 = first monitored interval) at which the detector signals either way, or undefined. An upward
 * signal is a finding of its own family; a fall is a sampling finding (check rate-fall) with the detector as basis.
 */
function firstSignal(steps: ReturnType<typeof evaluateComponent>['steps'], rule: string, from = 1): number | undefined {
  for (let i = from; i < steps.length; i++) if (steps[i]!.findings.some((f) => f.rule === rule || (f.rule === 'sampling' && f.basis === rule))) return i - from + 1;
  return undefined;
}

/** Maximum-likelihood ARL from right-censored geometric run lengths: observed points / signals. */
function estimateArl(runs: (number | undefined)[], horizon: number): { arl: number; signals: number } {
  let points = 0;
  let signals = 0;
  for (const r of runs) {
    points += r ?? horizon;
    if (r !== undefined) signals++;
  }
  return { arl: points / signals, signals };
}

describe('in-control false-alarm rate matches the design', () => {
  it(`with known in-control parameters: observed ARL within ±20 % of the designed ${ARL0} (CUSUM k=0.5 and EWMA λ=0.2, two-sided)`, () => {
    const settings = settingsFor(1_000_000);
    const runs = { cusum: [] as (number | undefined)[], ewma: [] as (number | undefined)[] };
    for (let s = 0; s < SERIES; s++) {
      const ev = evaluateComponent(simulatedSamples({ samples: LENGTH + 1 }, 1000 + s), settings, KNOWN);
      runs.cusum.push(firstSignal(ev.steps, 'cusum'));
      runs.ewma.push(firstSignal(ev.steps, 'ewma'));
    }
    const cusum = estimateArl(runs.cusum, LENGTH);
    const ewma = estimateArl(runs.ewma, LENGTH);
    console.info(`calibration, known parameters: CUSUM ARL ${cusum.arl.toFixed(1)} (${cusum.signals} signals), EWMA ARL ${ewma.arl.toFixed(1)} (${ewma.signals} signals); designed ${ARL0}`);
    // With ~300 signals the estimate's relative standard error is about 1/sqrt(300) ≈ 6 %: ±20 % is over 3 standard errors.
    expect(cusum.arl).toBeGreaterThan(ARL0 * 0.8);
    expect(cusum.arl).toBeLessThan(ARL0 * 1.2);
    expect(ewma.arl).toBeGreaterThan(ARL0 * 0.8);
    expect(ewma.arl).toBeLessThan(ARL0 * 1.2);
  });

  it('with the rate learnt from the default 12 own intervals: no more false alarms than designed, and not blunted past 2.5 × the design', () => {
    const settings = settingsFor(12);
    const runs = { cusum: [] as (number | undefined)[], ewma: [] as (number | undefined)[] };
    for (let s = 0; s < 250; s++) {
      const ev = evaluateComponent(simulatedSamples({ samples: LENGTH + 13 }, 3000 + s), settings);
      runs.cusum.push(firstSignal(ev.steps, 'cusum', 13));
      runs.ewma.push(firstSignal(ev.steps, 'ewma', 13));
    }
    const cusum = estimateArl(runs.cusum, LENGTH);
    const ewma = estimateArl(runs.ewma, LENGTH);
    console.info(`calibration, own 12-interval baseline: CUSUM ARL ${cusum.arl.toFixed(1)}, EWMA ARL ${ewma.arl.toFixed(1)}; designed ${ARL0}`);
    // The filter goes on learning the rate with the baseline's own uncertainty, so a short baseline's estimation
    // error does not turn into a standing bias. Carrying that uncertainty errs on the quiet side here.
    for (const r of [cusum, ewma]) {
      expect(r.arl).toBeGreaterThan(ARL0 * 0.8);
      expect(r.arl).toBeLessThan(ARL0 * 2.5);
    }
  });
});

describe('judged against a group baseline with unit-to-unit spread of the wear rate', () => {
  it('components whose own rate differs from the group mean (CV 20 %) keep the designed ARL within ±20 %', () => {
    const settings = settingsFor(1_000_000);
    const spread = 0.2 * IN_CONTROL.metals.Fe!.rate;
    const group: GroupStats = {
      group: 'sim-gearboxes',
      bands: {},
      baselines: { Fe: { ...IN_CONTROL.metals.Fe!, rateVariance: spread ** 2, intervals: 10_000, components: 100 } },
    };
    const naive: GroupStats = { ...group, baselines: { Fe: { ...group.baselines.Fe!, rateVariance: 0 } } };
    const runs = { learnt: [] as (number | undefined)[], naive: [] as (number | undefined)[] };
    for (let s = 0; s < SERIES; s++) {
      const unitRate = IN_CONTROL.metals.Fe!.rate + spread * seededNormal(7000 + s);
      const samples = simulatedSamples({ samples: LENGTH + 1, metals: { Fe: { ...IN_CONTROL.metals.Fe!, rate: unitRate } } }, 7000 + s);
      runs.learnt.push(firstSignal(evaluateComponent(samples, settings, group).steps, 'cusum'));
      runs.naive.push(firstSignal(evaluateComponent(samples, settings, naive).steps, 'cusum'));
    }
    const learnt = estimateArl(runs.learnt, LENGTH);
    const naiveArl = estimateArl(runs.naive, LENGTH);
    console.info(`group baseline with 20 % unit spread: CUSUM ARL ${learnt.arl.toFixed(1)} learning each unit's rate, ${naiveArl.arl.toFixed(1)} judged against the group mean alone; designed ${ARL0}`);
    expect(learnt.arl).toBeGreaterThan(ARL0 * 0.8);
    expect(learnt.arl).toBeLessThan(ARL0 * 1.2);
    // Without the spread the same units alarm far more often: the learning is what keeps the design.
    expect(naiveArl.arl).toBeLessThan(learnt.arl * 0.7);
  });
});

describe('a wear-rate step is detected', () => {
  it('doubling of the Fe wear rate after 30 samples: both detectors catch it, median delay reported', () => {
    const settings = settingsFor(8);
    const delays = { cusum: [] as number[], ewma: [] as number[] };
    const stepAt = 30;
    for (let s = 0; s < 100; s++) {
      const samples = simulatedSamples({ samples: stepAt + 60, metals: steppedFe(stepAt * IN_CONTROL.intervalHours, 2) }, 5000 + s);
      const ev = evaluateComponent(samples, settings);
      const first = ev.steps.findIndex((st) => Date.parse(st.sampledAt) - IN_CONTROL.startTime >= stepAt * IN_CONTROL.intervalHours * 3_600_000);
      for (const rule of ['cusum', 'ewma'] as const) {
        const d = firstSignal(ev.steps, rule, first);
        if (d !== undefined) delays[rule].push(d);
      }
    }
    const median = (xs: number[]) => [...xs].sort((a, b) => a - b)[Math.floor(xs.length / 2)]!;
    console.info(`step ×2: CUSUM caught ${delays.cusum.length}/100, median delay ${median(delays.cusum)} samples; EWMA caught ${delays.ewma.length}/100, median ${median(delays.ewma)}`);
    expect(delays.cusum.length).toBeGreaterThanOrEqual(95);
    expect(delays.ewma.length).toBeGreaterThanOrEqual(95);
    expect(median(delays.cusum)).toBeLessThanOrEqual(6);
    expect(median(delays.ewma)).toBeLessThanOrEqual(6);
  });
});
