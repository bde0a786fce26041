/**
 * The `ewma` and `cusum` rule families: change detection on the standardised prediction errors of each
 * detection measurand (see innovations.ts). In control the errors are independent N(0, 1), so the chart
 * limits come straight from run-length design (budget.ts). Findings are `watch`: a change is detected,
 * no limit is crossed. A fall is reported too (two-sided) because a wear rate does not fall by itself:
 * it points at a sampling fault, an unreported oil change or a mixed-up bottle.
 */
import type { Finding } from '../../domain/finding.ts';
import { MEASURANDS, type Measurand } from '../../domain/measurands.ts';
import type { ComponentSettings } from '../../domain/settings.ts';
import { ownRateBaseline } from '../baseline.ts';
import { detectionLimits } from '../budget.ts';
import { cusumChart } from '../cusum.ts';
import { ewmaChart } from '../ewma.ts';
import { innovations, type Innovation } from '../innovations.ts';
import type { BaselineSums, GroupStats, Interval, RateBaseline } from '../model.ts';
import { ownBaseline, type OwnBaseline } from '../ownBaseline.ts';
import type { RuleInput } from './ruleInput.ts';

export interface ChangeDetection {
  readonly findings: Finding[];
  /** The own baseline of the current component (since its last replacement), once complete. */
  readonly baselines: Partial<Record<Measurand, BaselineSums>>;
}

/** A group baseline is trusted once it pools at least this many components' complete baselines. */
const MIN_GROUP_COMPONENTS = 2;

export function changeFindings(input: RuleInput): ChangeDetection {
  const findings: Finding[] = [];
  const baselines: Partial<Record<Measurand, BaselineSums>> = {};
  const { detection } = input.settings;
  if (!detection.ewma.enabled && !detection.cusum.enabled) return { findings, baselines };
  const limits = detectionLimits(detection);
  for (const measurand of detection.measurands) {
    const intervals = input.intervals(measurand);
    for (const life of lifeInnovations(input, measurand)) {
      if (life.own && life.current) baselines[measurand] = life.own.sums;
      findings.push(...detectorFindings(input, measurand, intervals, life.errors, limits, life.own?.completedAt ?? Infinity));
    }
  }
  return { findings, baselines };
}

export interface LifeInnovations {
  readonly errors: Innovation[];
  /** The life's own baseline, once complete. */
  readonly own?: OwnBaseline;
  /** True for the component's current life (since its last replacement). */
  readonly current: boolean;
}

/**
 * The prediction errors of each life of the component (between replacements), each judged against its own
 * baseline once complete, else the group's. The detectors and the trend charts both start from these.
 */
export function lifeInnovations(input: RuleInput, measurand: Measurand): LifeInnovations[] {
  const { detection } = input.settings;
  const intervals = input.intervals(measurand);
  const groupBaseline = trustedGroupBaseline(input.group, measurand);
  const starts = intervals.flatMap((iv, i) => (i === 0 || iv.to.componentChanged ? [i] : []));
  return starts.map((start, n) => {
    const end = starts[n + 1] ?? intervals.length;
    const own = ownBaseline(intervals.slice(0, end), detection, start);
    const ownRate = own && ownRateBaseline(own.sums, detection.budget.sampleIntervalHours);
    const baselineAt = (index: number): RateBaseline | undefined =>
      index < start || index >= end ? undefined : own && ownRate && index > own.completedAt ? ownRate : groupBaseline;
    return { errors: innovations(intervals, detection.labNoise, baselineAt), current: end === intervals.length, ...(own && { own }) };
  });
}

function trustedGroupBaseline(group: GroupStats | undefined, m: Measurand): RateBaseline | undefined {
  const b = group?.baselines[m];
  return b !== undefined && b.components >= MIN_GROUP_COMPONENTS ? b : undefined;
}

function detectorFindings(
  input: RuleInput,
  measurand: Measurand,
  intervals: readonly Interval[],
  errors: readonly Innovation[],
  limits: ReturnType<typeof detectionLimits>,
  ownFrom: number,
): Finding[] {
  const { settings } = input;
  const { detection } = settings;
  const out: Finding[] = [];
  const zs = errors.map((e) => e.z);
  const report = (e: Innovation, rule: 'ewma' | 'cusum', direction: 'up' | 'down', value: number, threshold: number) => {
    if (direction === 'down' && detection.sided !== 'two') return;
    const iv = intervals[e.interval]!;
    out.push({
      unit: input.history.unit,
      component: input.history.component,
      group: settings.group,
      measurand,
      rule,
      severity: 'watch',
      value: round(value),
      threshold: round(threshold),
      basis: rule,
      direction,
      sampleId: iv.to.sampleId,
      sampledAt: iv.to.sampledAt,
      explanation: explain(measurand, rule, direction, value, threshold, e, e.interval > ownFrom, settings),
    });
  };
  if (detection.cusum.enabled) {
    const points = cusumChart(zs, 0, 1, { k: detection.cusum.k, h: limits.cusumH, headstart: detection.cusum.headstart });
    points.forEach((p, n) => {
      if (p.upper > limits.cusumH) report(errors[n]!, 'cusum', 'up', p.upper, limits.cusumH);
      if (p.lower > limits.cusumH) report(errors[n]!, 'cusum', 'down', p.lower, limits.cusumH);
    });
  }
  if (detection.ewma.enabled) {
    const points = ewmaChart(zs, 0, 1, { lambda: detection.ewma.lambda, L: limits.ewmaL, exactLimits: true });
    points.forEach((p, n) => {
      if (p.ewma > p.ucl) report(errors[n]!, 'ewma', 'up', p.ewma, p.ucl);
      if (p.ewma < p.lcl) report(errors[n]!, 'ewma', 'down', p.ewma, p.lcl);
    });
  }
  return out;
}

function explain(
  m: Measurand,
  rule: 'ewma' | 'cusum',
  direction: 'up' | 'down',
  value: number,
  threshold: number,
  e: Innovation,
  ownBaselineInForce: boolean,
  settings: ComponentSettings,
): string {
  const name = `${m} (${MEASURANDS[m].label})`;
  const stat = rule === 'cusum' ? `CUSUM ${fmt(value)} against its decision interval ${fmt(threshold)}` : `EWMA ${fmt(value)} beyond its limit ${fmt(threshold)}`;
  const reference = ownBaselineInForce ? 'its own stable history' : `group ${settings.group}`;
  const rates = `in-control ${fmt(e.baselineRate * 100)} ppm/100 h from ${reference}, latest interval ${fmt(e.rate * 100)} ppm/100 h`;
  return direction === 'up'
    ? `${name} wear rate has shifted up: ${stat} (${rates}).`
    : `${name} is rising more slowly than it should: ${stat} (${rates}); check for a sampling fault or an unreported oil change.`;
}

function round(x: number): number {
  return Math.round(x * 1000) / 1000;
}

function fmt(x: number): string {
  return Number(x.toPrecision(3)).toString();
}
