/**
 * What every rule family receives, and the pieces they share: judging a reading against caution/alarm
 * levels, and wording a finding so that an engineer reads the values with their units.
 */
import type { Levels } from '../../domain/config.ts';
import type { Sample } from '../../domain/event.ts';
import type { Finding } from '../../domain/finding.ts';
import { MEASURANDS, type Measurand } from '../../domain/measurands.ts';
import { formatReading, type Reading } from '../../domain/reading.ts';
import type { ComponentSettings } from '../../domain/settings.ts';
import type { ComponentHistory, GroupStats, Interval } from '../model.ts';

/** What every rule judges one sample with: the component, its settings and its group's statistics at the sample. */
export interface SampleInput {
  readonly unit: string;
  readonly component: string;
  readonly settings: ComponentSettings;
  /** Population statistics and baselines of the component's group as they stood when the sample was drawn. */
  readonly group?: GroupStats;
  readonly sample: Sample;
  /** The wear interval of each metal that ends at this sample. */
  readonly intervals: ReadonlyMap<Measurand, Interval>;
}

/** A whole history with its intervals, for judging every sample in one sweep (tests, and tools that need one family). */
export interface RuleInput {
  readonly history: ComponentHistory;
  readonly settings: ComponentSettings;
  /** Population statistics and baselines of the component's group, when known. */
  readonly group?: GroupStats;
  /** The wear intervals of a measurand over the history (callers memoise: several families ask). */
  readonly intervals: (m: Measurand) => readonly Interval[];
}

/** Runs a per-sample rule over every sample of a history. */
export function sweep(input: RuleInput, judge: (s: SampleInput) => Finding[], measurands: readonly Measurand[] = []): Finding[] {
  const ending = new Map<string, Map<Measurand, Interval>>();
  for (const m of measurands) {
    for (const iv of input.intervals(m)) {
      let byMeasurand = ending.get(iv.to.sampleId);
      if (byMeasurand === undefined) ending.set(iv.to.sampleId, (byMeasurand = new Map()));
      byMeasurand.set(m, iv);
    }
  }
  const none = new Map<Measurand, Interval>();
  return input.history.samples.flatMap((sample) =>
    judge({
      unit: input.history.unit,
      component: input.history.component,
      settings: input.settings,
      ...(input.group !== undefined && { group: input.group }),
      sample,
      intervals: ending.get(sample.sampleId) ?? none,
    }),
  );
}

/** A finding without the identity fields that come from the component and the sample. */
export type Verdict = Omit<Finding, 'unit' | 'component' | 'group' | 'sampleId' | 'sampledAt'>;

export function findingAt(input: Pick<SampleInput, 'unit' | 'component' | 'settings'>, sample: Sample, verdict: Verdict): Finding {
  return {
    unit: input.unit,
    component: input.component,
    group: input.settings.group,
    sampleId: sample.sampleId,
    sampledAt: sample.sampledAt,
    ...verdict,
  };
}

export interface Crossing {
  readonly severity: 'caution' | 'alarm';
  /** The level crossed. */
  readonly level: number;
  /** The number judged: the reading, or the bound of a censored reading. */
  readonly value: number;
}

/**
 * The worst level a reading is certainly beyond (strictly above, or strictly below for a falling quantity).
 * A censored reading counts only when its bound settles the question: ">x" is above every level up to x,
 * "<x" is below every level from x; "<x" is never above anything and ">x" never below.
 */
export function crossing(reading: Reading, levels: Levels, side: 'above' | 'below'): Crossing | undefined {
  for (const severity of ['alarm', 'caution'] as const) {
    const level = levels[severity];
    if (level === undefined) continue;
    const value = certainlyBeyond(reading, level, side);
    if (value !== undefined) return { severity, level, value };
  }
  return undefined;
}

function certainlyBeyond(reading: Reading, level: number, side: 'above' | 'below'): number | undefined {
  if (reading.kind === 'code') return undefined;
  if (reading.kind === 'value') return (side === 'above' ? reading.value > level : reading.value < level) ? reading.value : undefined;
  if (reading.bound !== side) return undefined;
  return (side === 'above' ? reading.limit >= level : reading.limit <= level) ? reading.limit : undefined;
}

/** How the measurand is named in a sentence: the element symbol, or its label ("Viscosity at 40 °C"). */
export function measurandTitle(m: Measurand): string {
  if (/^[A-Z]/.test(m)) return m;
  const label: string = MEASURANDS[m].label;
  return label.charAt(0).toUpperCase() + label.slice(1);
}

/** A number with its unit, three significant figures (whole numbers from 1000): "152 ppm". */
export function quantity(m: Measurand, value: number): string {
  return readingText(m, { kind: 'value', value });
}

/** A reading as the lab gave it, with its unit: "152 ppm", ">5000 ppm", "<0.1 %". */
export function readingText(m: Measurand, reading: Reading): string {
  const unit: string = MEASURANDS[m].unit;
  const text = reading.kind === 'value' ? formatNumber(reading.value) : formatReading(reading);
  return unit === 'index' || unit === 'code' ? text : `${text} ${unit}`;
}

export function formatNumber(x: number): string {
  return Math.abs(x) >= 1000 ? String(Math.round(x)) : String(Number(x.toPrecision(3)));
}
