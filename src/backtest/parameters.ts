/**
 * The detector parameters a backtest ran with, and a configuration with a false-alarm budget put in place of the
 * configured one. The numbers come from the detectors' own design path (budget.ts: changeDesign), so they are the
 * ones the worker uses and the ones `wearshift design --budget … --every … --charts …` prints for the same target.
 */
import { changeDesign, parseBudget, samplesPerBudgetPeriod, type ChangeDesign } from '../analysis/budget.ts';
import type { Config, Detection } from '../domain/config.ts';
import { resolveSettings } from '../domain/settings.ts';
// The same rounding as `wearshift design --json`, so that both print equal numbers.
import { tidy } from '../domain/numbers.ts';

export interface BudgetText {
  /** As the user wrote it: "1 per component per 3 years". */
  readonly text: string;
  readonly alarms: number;
  readonly years: number;
}

/** The chart parameters of one set of detection settings, with the conversion from the budget to ARL0. */
export interface DetectorParameters {
  /** Groups of the history that run with these settings. */
  readonly groups: readonly string[];
  readonly measurands: readonly string[];
  readonly sided: Detection['sided'];
  readonly budget: { readonly alarms: number; readonly years: number; readonly sampleIntervalHours: number; readonly hoursPerYear: number };
  /** years · hoursPerYear / sampleIntervalHours. */
  readonly samplesPerComponent: number;
  /** samplesPerComponent / alarms: the in-control run length of the whole component. */
  readonly componentArl0: number;
  /** Detection measurands × enabled detectors. */
  readonly charts: number;
  /** The part of the budget the rise side of the charts gets (wear incidents). */
  readonly share: number;
  /** componentArl0 × charts / share: the in-control run length each chart's rise side is designed for. */
  readonly arl0: number;
  readonly cusum: { readonly enabled: boolean; readonly k: number; readonly headstart: number; readonly h: number; readonly fromBudget: boolean };
  readonly ewma: { readonly enabled: boolean; readonly lambda: number; readonly L: number; readonly fromBudget: boolean };
  /** Two-sided charts: the fall side (sampling incidents), designed for its own part of the budget. */
  readonly fall: { readonly share: number; readonly arl0: number; readonly h: number; readonly L: number } | null;
  /** The `wearshift design` commands that print the same h and L. */
  readonly designCommands: readonly string[];
}

/** The configuration with the budget's alarms and period in place of the configured ones, everywhere they are set. */
export function withBudget(config: Config, budget: BudgetText): Config {
  const swap = <T extends { budget?: Partial<Detection['budget']> }>(d: T): T =>
    d.budget === undefined ? d : { ...d, budget: { ...d.budget, alarms: budget.alarms, years: budget.years } };
  return {
    ...config,
    detection: swap(config.detection),
    groups: config.groups.map((g) => (g.detection === undefined ? g : { ...g, detection: swap(g.detection) })),
  };
}

export function readBudget(text: string): BudgetText {
  return { text, ...parseBudget(text) };
}

/** One entry per distinct detection settings among the components, with the groups that use it. */
export function detectorParameters(config: Config, components: readonly { unit: string; component: string; group?: string }[]): DetectorParameters[] {
  const byDesign = new Map<string, { detection: Detection; design: ChangeDesign; groups: Set<string> }>();
  for (const c of components) {
    const settings = resolveSettings(config, c);
    const design = changeDesign(settings.detection, settings.population);
    const key = JSON.stringify([settings.detection, design.riseShare, design.fallShare]);
    const known = byDesign.get(key) ?? { detection: settings.detection, design, groups: new Set<string>() };
    known.groups.add(settings.group);
    byDesign.set(key, known);
  }
  return [...byDesign.values()].map(({ detection, design, groups }) => parametersOf(detection, design, [...groups].sort()));
}

function parametersOf(d: Detection, design: ChangeDesign, groups: string[]): DetectorParameters {
  const limits = design.rise;
  const samplesPerComponent = samplesPerBudgetPeriod(d.budget);
  const budgetArgs = (share: number) =>
    `--budget "${d.budget.alarms} per component per ${d.budget.years} years" --every ${d.budget.sampleIntervalHours} --hours-per-year ${d.budget.hoursPerYear} ` +
    `--charts ${Math.max(1, limits.charts)} --share ${tidy(share)} --sided one`;
  const commands = (share: number) => [
    ...(d.cusum.h === undefined ? [`wearshift design cusum --k ${d.cusum.k} --headstart ${d.cusum.headstart} ${budgetArgs(share)}`] : []),
    ...(d.ewma.L === undefined ? [`wearshift design ewma --lambda ${d.ewma.lambda} --exact-limits ${budgetArgs(share)}`] : []),
  ];
  const designCommands = [...commands(design.riseShare), ...(design.fall !== undefined ? commands(design.fallShare) : [])];
  return {
    groups,
    measurands: d.measurands,
    sided: d.sided,
    budget: { alarms: d.budget.alarms, years: d.budget.years, sampleIntervalHours: d.budget.sampleIntervalHours, hoursPerYear: d.budget.hoursPerYear },
    samplesPerComponent: tidy(samplesPerComponent),
    componentArl0: tidy(samplesPerComponent / d.budget.alarms),
    charts: limits.charts,
    share: tidy(design.riseShare),
    arl0: tidy(limits.arl0),
    cusum: { enabled: d.cusum.enabled, k: d.cusum.k, headstart: d.cusum.headstart, h: tidy(limits.cusumH), fromBudget: d.cusum.h === undefined },
    ewma: { enabled: d.ewma.enabled, lambda: d.ewma.lambda, L: tidy(limits.ewmaL), fromBudget: d.ewma.L === undefined },
    fall: design.fall === undefined ? null : { share: tidy(design.fallShare), arl0: tidy(design.fall.arl0), h: tidy(design.fall.cusumH), L: tidy(design.fall.ewmaL) },
    designCommands,
  };
}
