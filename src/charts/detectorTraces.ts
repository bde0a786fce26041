/**
 * The EWMA and CUSUM statistics at every judged interval of one detection measurand, for the chart's detector panels.
 * The findings only say where a detector signalled; the chart must show how the statistic moved towards its limit.
 * The inputs are built as the `ewma`/`cusum` rule family builds them (src/analysis/rules/change.ts): each life of the
 * component (between replacements) on its own, judged against its own baseline once complete, else the group's.
 * tests/unit/chart-series.test.ts checks that these traces cross their limits exactly where the rule raised findings.
 */
import type { Measurand } from '../domain/measurands.ts';
import { detectionLimits } from '../analysis/budget.ts';
import { cusumChart } from '../analysis/cusum.ts';
import { ewmaChart } from '../analysis/ewma.ts';
import { lifeInnovations } from '../analysis/rules/change.ts';
import type { RuleInput } from '../analysis/rules/ruleInput.ts';

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
  /** Decision interval in sigma: a sum above it signals. */
  readonly h: number;
  /** 'two': the lower sum (a fall in wear rate, a possible sampling fault) is judged too. */
  readonly sided: 'two' | 'up';
  readonly points: readonly CusumPoint[];
}

export interface EwmaTrace {
  readonly lambda: number;
  readonly L: number;
  readonly sided: 'two' | 'up';
  readonly points: readonly EwmaPoint[];
}

export function detectorTraces(input: RuleInput, measurand: Measurand): { cusum: CusumTrace | null; ewma: EwmaTrace | null } {
  const { detection } = input.settings;
  if (!detection.cusum.enabled && !detection.ewma.enabled) return { cusum: null, ewma: null };
  const limits = detectionLimits(detection);
  const intervals = input.intervals(measurand);
  const cusum: CusumPoint[] = [];
  const ewma: EwmaPoint[] = [];
  lifeInnovations(input, measurand).forEach(({ errors }, life) => {
    const base = errors.map((e) => ({ sampleId: intervals[e.interval]!.to.sampleId, sampledAt: intervals[e.interval]!.to.sampledAt, life, z: e.z }));
    const zs = errors.map((e) => e.z);
    if (detection.cusum.enabled) {
      const params = { k: detection.cusum.k, h: limits.cusumH, headstart: detection.cusum.headstart };
      cusumChart(zs, 0, 1, params).forEach((p, n) => cusum.push({ ...base[n]!, upper: p.upper, lower: p.lower }));
    }
    if (detection.ewma.enabled) {
      ewmaChart(zs, 0, 1, { lambda: detection.ewma.lambda, L: limits.ewmaL, exactLimits: true }).forEach((p, n) =>
        ewma.push({ ...base[n]!, ewma: p.ewma, ucl: p.ucl, lcl: p.lcl }),
      );
    }
  });
  return {
    cusum: detection.cusum.enabled ? { k: detection.cusum.k, h: limits.cusumH, sided: detection.sided, points: cusum } : null,
    ewma: detection.ewma.enabled ? { lambda: detection.ewma.lambda, L: limits.ewmaL, sided: detection.sided, points: ewma } : null,
  };
}
