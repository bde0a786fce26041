/**
 * The EWMA and CUSUM statistics at every judged interval of one detection measurand, for the chart's detector panels.
 * The findings only say where a detector signalled; the chart must show how the statistic moved towards its limit.
 * The evaluation hands them over with each step (the statistics the rule judged), so nothing is computed twice.
 * tests/unit/chart-series.test.ts checks that these traces cross their limits exactly where the rule raised findings.
 */
import type { Measurand } from '../domain/measurands.ts';
import { changeDesign } from '../analysis/budget.ts';
import type { FoldStep } from '../analysis/fold/analysisFold.ts';
import type { ComponentSettings } from '../domain/settings.ts';

export interface DetectorPointBase {
  /** The sample that ends the judged interval. */
  readonly sampleId: string;
  readonly sampledAt: string;
  /** Component life (counted from 0, a new one after every replacement): the statistic restarts with each. */
  readonly life: number;
  /** The standardised prediction error fed to the detector. */
  readonly z: number;
}

export interface CusumPoint extends DetectorPointBase {
  readonly upper: number;
  readonly lower: number;
}

export interface EwmaPoint extends DetectorPointBase {
  readonly ewma: number;
  readonly ucl: number;
  readonly lcl: number;
}

export interface CusumTrace {
  readonly k: number;
  /** Decision interval in sigma: an upper sum above it signals a rise. */
  readonly h: number;
  /** The lower sum's decision interval (sided: two; the fall side has its own part of the budget). */
  readonly hFall: number;
  /** 'two': the lower sum (a fall in wear rate, a possible sampling fault) is judged too. */
  readonly sided: 'two' | 'up';
  readonly points: readonly CusumPoint[];
}

export interface EwmaTrace {
  readonly lambda: number;
  readonly L: number;
  /** The lower limit's width (sided: two). */
  readonly LFall: number;
  readonly sided: 'two' | 'up';
  readonly points: readonly EwmaPoint[];
}

export function detectorTraces(steps: readonly FoldStep[], settings: ComponentSettings, measurand: Measurand): { cusum: CusumTrace | null; ewma: EwmaTrace | null } {
  const { detection } = settings;
  if (!detection.cusum.enabled && !detection.ewma.enabled) return { cusum: null, ewma: null };
  const { rise, fall = rise } = changeDesign(detection, settings.population);
  const cusum: CusumPoint[] = [];
  const ewma: EwmaPoint[] = [];
  for (const step of steps) {
    for (const p of step.detail.change) {
      if (p.interval.measurand !== measurand) continue;
      const base = { sampleId: step.sampleId, sampledAt: step.sampledAt, life: p.life, z: p.z };
      if (p.cusum !== undefined) cusum.push({ ...base, upper: p.cusum.upper, lower: p.cusum.lower });
      if (p.ewma !== undefined) ewma.push({ ...base, ewma: p.ewma.value, ucl: p.ewma.ucl, lcl: p.ewma.lcl });
    }
  }
  return {
    cusum: detection.cusum.enabled ? { k: detection.cusum.k, h: rise.cusumH, hFall: fall.cusumH, sided: detection.sided, points: cusum } : null,
    ewma: detection.ewma.enabled ? { lambda: detection.ewma.lambda, L: rise.ewmaL, LFall: fall.ewmaL, sided: detection.sided, points: ewma } : null,
  };
}
