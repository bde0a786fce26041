/** What the analysis core concludes: one rule's verdict on the latest state of one measurand of one component. */
import type { Measurand } from './measurands.ts';

export const RULE_FAMILIES = ['limit', 'rate', 'population', 'ewma', 'cusum', 'condition', 'cleanliness'] as const;
export type RuleFamily = (typeof RULE_FAMILIES)[number];

export const SEVERITIES = ['watch', 'caution', 'alarm'] as const;
export type Severity = (typeof SEVERITIES)[number];

export function severityRank(s: Severity): number {
  return SEVERITIES.indexOf(s);
}

export function maxSeverity(a: Severity, b: Severity): Severity {
  return severityRank(a) >= severityRank(b) ? a : b;
}

export interface Finding {
  readonly unit: string;
  readonly component: string;
  readonly group: string;
  readonly measurand: Measurand;
  readonly rule: RuleFamily;
  readonly severity: Severity;
  /** The value the rule judged, in the unit of `basis` (a reading, a rate per 100 h, a statistic, a code step). */
  readonly value: number;
  /** The level the value was compared with, when the rule has one. */
  readonly threshold?: number;
  /** What `value` is: 'reading', 'rate', 'ewma', 'cusum', 'change', 'steps'. */
  readonly basis: string;
  /** For change detectors: which way the shift went. A fall in a wear rate points to a sampling fault. */
  readonly direction?: 'up' | 'down';
  readonly sampleId: string;
  readonly sampledAt: string;
  /** One sentence an engineer understands. */
  readonly explanation: string;
}

/** A stable identity for "the same finding", used to de-duplicate notifications. */
export function findingKey(f: Pick<Finding, 'measurand' | 'rule' | 'direction'>): string {
  return `${f.measurand}:${f.rule}${f.direction ? `:${f.direction}` : ''}`;
}
