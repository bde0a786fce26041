/**
 * The demo's headline: for each component, when each rule family first spoke (by sample date), and how many
 * samples earlier than the fixed limit the first upward change was seen.
 */
import type { Finding, RuleFamily, Severity } from '../domain/finding.ts';
import type { Measurand } from '../domain/measurands.ts';
import type { StepRecord } from '../storage/storage.ts';

export interface FirstFinding {
  readonly rule: RuleFamily;
  readonly measurand: Measurand;
  readonly severity: Severity;
  readonly direction?: 'up' | 'down';
  readonly sampleId: string;
  readonly sampledAt: string;
}

export interface ComponentTimeline {
  readonly unit: string;
  readonly component: string;
  readonly samples: number;
  /** The first finding of each rule family (and direction), in sample order. */
  readonly firsts: readonly FirstFinding[];
  /** The first finding of the fixed-limit family. */
  readonly fixedLimit?: FirstFinding;
  /** The first finding that is not a fall (a fall in wear rate points to a sampling fault, not wear). */
  readonly earliest?: FirstFinding;
  /** Samples from the earliest finding up to (not including) the fixed limit's sample. */
  readonly samplesAhead?: number;
  readonly daysAhead?: number;
}

export interface TimelineInput {
  readonly unit: string;
  readonly component: string;
  /** Sample dates of every distinct sample of the component. */
  readonly sampleDates: readonly { readonly sampleId: string; readonly sampledAt: string }[];
  readonly steps: readonly StepRecord[];
}

const byDate = (a: { sampledAt: string; sampleId: string }, b: { sampledAt: string; sampleId: string }) =>
  a.sampledAt < b.sampledAt ? -1 : a.sampledAt > b.sampledAt ? 1 : a.sampleId < b.sampleId ? -1 : a.sampleId > b.sampleId ? 1 : 0;

export function componentTimeline(input: TimelineInput): ComponentTimeline {
  const firsts = new Map<string, FirstFinding>();
  for (const step of [...input.steps].sort(byDate)) {
    for (const f of step.findings) {
      const key = `${f.rule}${f.direction === 'down' ? ':down' : ''}`;
      if (!firsts.has(key)) firsts.set(key, firstOf(f, step));
    }
  }
  const ordered = [...firsts.values()].sort(byDate);
  const fixedLimit = ordered.find((f) => f.rule === 'limit');
  const earliest = ordered.find((f) => f.direction !== 'down');
  const samples = new Set(input.sampleDates.map((s) => s.sampleId)).size;
  const base = { unit: input.unit, component: input.component, samples, firsts: ordered, ...(fixedLimit && { fixedLimit }), ...(earliest && { earliest }) };
  if (fixedLimit === undefined || earliest === undefined || earliest === fixedLimit) return base;
  const distinct = new Map(input.sampleDates.map((s) => [s.sampleId, s.sampledAt]));
  const samplesAhead = [...distinct].filter(([id, at]) => byDate({ sampleId: id, sampledAt: at }, earliest) >= 0 && byDate({ sampleId: id, sampledAt: at }, fixedLimit) < 0).length;
  const daysAhead = Math.round((Date.parse(fixedLimit.sampledAt) - Date.parse(earliest.sampledAt)) / 86_400_000);
  return { ...base, samplesAhead, daysAhead };
}

function firstOf(f: Finding, step: StepRecord): FirstFinding {
  return { rule: f.rule, measurand: f.measurand, severity: f.severity, ...(f.direction && { direction: f.direction }), sampleId: step.sampleId, sampledAt: step.sampledAt };
}

const RULE_LABEL: Record<RuleFamily, string> = {
  limit: 'fixed limit',
  rate: 'rate',
  population: 'population',
  ewma: 'ewma',
  cusum: 'cusum',
  condition: 'condition',
  cleanliness: 'cleanliness',
};

/** e.g. "Fe cusum watch 2026-04-10 · Fe rate caution 2026-06-19 · Fe fixed limit caution 2026-06-30 → caught 8 samples (81 days) before the fixed limit" */
export function formatTimeline(t: ComponentTimeline): string {
  if (t.firsts.length === 0) return 'no findings';
  const parts = t.firsts.map((f) => `${f.measurand} ${RULE_LABEL[f.rule]}${f.direction === 'down' ? ' (fall)' : ''} ${f.severity} ${f.sampledAt.slice(0, 10)}`);
  return `${parts.join(' · ')}${verdict(t)}`;
}

function verdict(t: ComponentTimeline): string {
  if (t.earliest === undefined) return '';
  if (t.fixedLimit === undefined) return ' → no fixed limit crossed in the demo period';
  if (t.samplesAhead === undefined || t.samplesAhead === 0) return ' → first seen at the fixed limit';
  return ` → caught ${t.samplesAhead} sample${t.samplesAhead === 1 ? '' : 's'} (${t.daysAhead} days) before the fixed limit`;
}
