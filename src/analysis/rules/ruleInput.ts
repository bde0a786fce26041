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

export interface RuleInput {
  readonly history: ComponentHistory;
  readonly settings: ComponentSettings;
  /** Population statistics and baselines of the component's group, when known. */
  readonly group?: GroupStats;
  /** The wear intervals of a measurand over the history (callers memoise: several families ask). */
  readonly intervals: (m: Measurand) => readonly Interval[];
}

/** A finding without the identity fields that come from the component and the sample. */
export type Verdict = Omit<Finding, 'unit' | 'component' | 'group' | 'sampleId' | 'sampledAt'>;

export function findingAt(input: RuleInput, sample: Sample, verdict: Verdict): Finding {
  return {
    unit: input.history.unit,
    component: input.history.component,
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
