/** What the analysis core concludes: one rule's verdict on the latest state of one measurand of one component. */
import type { Measurand } from './measurands.ts';

export const RULE_FAMILIES = ['limit', 'rate', 'population', 'ewma', 'cusum', 'condition', 'cleanliness', 'sampling'] as const;
export type RuleFamily = (typeof RULE_FAMILIES)[number];

/**
 * How each family is named for people: the one label table (board, charts, e-mail, replay, backtest). A family
 * added to RULE_FAMILIES without a label here fails the type check.
 */
export const RULE_FAMILY_LABELS = {
  limit: 'fixed limit',
  rate: 'rate limit',
  population: 'group limit',
  ewma: 'EWMA',
  cusum: 'CUSUM',
  condition: 'oil condition',
  cleanliness: 'cleanliness',
  sampling: 'sampling check',
} as const satisfies Record<RuleFamily, string>;

/**
 * What a finding asks of people (ISA-18.2 separates alarms, which need a response, from alerts and advisories):
 * - `incident`: opens or updates an incident and is announced by its escalation policy — a machine incident, or
 *   for the `sampling` family a sampling incident for whoever takes the samples and the lab;
 * - `advisory`: shown as status (board, charts, API, e-mail evidence), the way a lab report shows it, but opens
 *   nothing: e.g. a single result above the population limits of its band;
 * - `held`: would open an incident, but its sample is in doubt (a sampling finding at the same sample); it counts
 *   once a responder confirms the sample.
 */
export const DISPOSITIONS = ['incident', 'advisory', 'held'] as const;
export type Disposition = (typeof DISPOSITIONS)[number];

/** The checks of the `sampling` family: sampling and data faults, not wear. */
export const SAMPLING_CHECKS = [
  'new-oil-mid-charge',
  'oil-hours-back',
  'unit-hours-back',
  'reading-drop',
  'duplicate-bottle',
  'foreign-oil',
  'rate-fall',
] as const;
export type SamplingCheck = (typeof SAMPLING_CHECKS)[number];

/**
 * The sampling checks that judge the whole sample (its label, its hours, its bottle, its oil), not one measurand. A
 * finding of these still carries a `measurand`, which only files it (its key, stored data); people and systems are
 * shown its subject, `SAMPLE_SUBJECT`, never that measurand as if it were what the fault is about. `reading-drop` and
 * `rate-fall` are about one metal and keep it.
 */
export const SAMPLE_WIDE_CHECKS = ['duplicate-bottle', 'unit-hours-back', 'oil-hours-back', 'new-oil-mid-charge', 'foreign-oil'] as const satisfies readonly SamplingCheck[];

/**
 * The sample-wide checks whose `measurand` files them only (the first wear metal of the readings): no trend of that
 * metal shows the fault. The others file theirs under the metal that shows it (a new-oil bottle: the metal that fell
 * to new-oil level; hours going back: a metal compared; another oil: the additive that differs), whose trend is what
 * a person judging the sample needs to see beside it.
 */
export const CHARTLESS_CHECKS = ['duplicate-bottle', 'unit-hours-back'] as const satisfies readonly SamplingCheck[];

/** Whether a finding's measurand is a trend worth charting beside it (every finding but a `CHARTLESS_CHECKS` one). */
export function chartable(f: { readonly rule: string; readonly check?: string | undefined }): boolean {
  return !(f.rule === 'sampling' && f.check !== undefined && (CHARTLESS_CHECKS as readonly string[]).includes(f.check));
}

/** What a sample-wide finding is about, in place of a measurand. */
export const SAMPLE_SUBJECT = 'sample';

/** What a finding is about: a measurand, or the whole sample. */
export type FindingSubject = Measurand | typeof SAMPLE_SUBJECT;

/** Whether a finding is about the whole sample (a sample-wide check of the `sampling` family). */
export function sampleWide(f: { readonly rule: string; readonly check?: string | undefined }): boolean {
  return f.rule === 'sampling' && f.check !== undefined && (SAMPLE_WIDE_CHECKS as readonly string[]).includes(f.check);
}

/**
 * What joined an incident's evidence, in words ("Fe joined", "sample (another unit's sample) joined"): the findings'
 * subjects among those filed under `measurands`, a sample-wide one by its check in words (`foundByWords`).
 */
export function joinedWords(findings: readonly Pick<Finding, 'measurand' | 'rule' | 'check'>[], measurands: readonly Measurand[]): string {
  const words = findings.filter((f) => measurands.includes(f.measurand)).map((f) => (sampleWide(f) ? `${SAMPLE_SUBJECT} (${foundByWords(f)})` : f.measurand));
  return [...new Set(words)].sort().join(', ');
}

/** A sample-wide sampling check in words, wherever people read of one (messages, e-mail, the board carries a copy). */
export const SAMPLE_WIDE_WORDS: Readonly<Record<(typeof SAMPLE_WIDE_CHECKS)[number], string>> = {
  'duplicate-bottle': 'duplicated bottle',
  'unit-hours-back': 'unit hours back',
  'oil-hours-back': 'oil hours back',
  'new-oil-mid-charge': 'new-oil bottle mid-charge',
  'foreign-oil': "another unit's sample",
};

/** What found it, in words: a sample-wide finding by its check ("duplicated bottle"), any other by its rule. */
export function foundByWords(f: { readonly rule: string; readonly check?: string | undefined }): string {
  return sampleWide(f) ? SAMPLE_WIDE_WORDS[f.check as (typeof SAMPLE_WIDE_CHECKS)[number]] : f.rule;
}

/** What a finding is about, as people and systems are shown it: its measurand, or `sample` for a sample-wide check. */
export function subjectOf<M extends string = Measurand>(f: { readonly measurand: M; readonly rule: string; readonly check?: string | undefined }): M | typeof SAMPLE_SUBJECT {
  return sampleWide(f) ? SAMPLE_SUBJECT : f.measurand;
}

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
  /** What the finding asks of people; see DISPOSITIONS. */
  readonly disposition: Disposition;
  /** For the `sampling` family: which check fired. */
  readonly check?: SamplingCheck;
  readonly sampleId: string;
  readonly sampledAt: string;
  /** One sentence an engineer understands. */
  readonly explanation: string;
}

/** A stable identity for "the same finding", used to de-duplicate notifications. */
export function findingKey(f: Pick<Finding, 'measurand' | 'rule' | 'direction' | 'check'>): string {
  return `${f.measurand}:${f.rule}${f.direction ? `:${f.direction}` : ''}${f.check ? `:${f.check}` : ''}`;
}

/** The incident a finding belongs to: a machine incident, or a sampling incident for the sampling family. */
export type IncidentKind = 'machine' | 'sampling';

export function incidentKindOf(f: Pick<Finding, 'rule'>): IncidentKind {
  return f.rule === 'sampling' ? 'sampling' : 'machine';
}
