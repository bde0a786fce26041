/**
 * The demo's headline: for each component, when each rule family first spoke (by sample date), and how many
 * samples earlier than the fixed limit the first upward change opened or escalated an incident. Advisory findings
 * (the group limits by default) are listed but do not count as caught: they page nobody, and where a group limit
 * is first crossed depends on where the month boundaries fall in the fleet's calendar (the group's statistics are
 * taken as of each sample's month).
 */
import { RULE_FAMILY_LABELS, type Disposition, type Finding, type RuleFamily, type Severity } from '../domain/finding.ts';
import type { Measurand } from '../domain/measurands.ts';
import type { StepRecord } from '../pipeline/ports.ts';

export interface FirstFinding {
  readonly rule: RuleFamily;
  readonly measurand: Measurand;
  readonly severity: Severity;
  readonly direction?: 'up' | 'down';
  /** Whether the finding opens or escalates an incident ('incident') or only informs ('advisory'). */
  readonly disposition: Disposition;
  readonly sampleId: string;
  readonly sampledAt: string;
}

export interface ComponentTimeline {
  readonly unit: string;
  readonly component: string;
  readonly samples: number;
  /**
   * The first finding of each rule family (and direction), in sample order: within the episode that led up
   * to the fixed limit when one was crossed, over the whole history otherwise.
   */
  readonly firsts: readonly FirstFinding[];
  /** The first finding of the fixed-limit family. */
  readonly fixedLimit?: FirstFinding;
  /**
   * The first rise (not a fall: a fall in wear rate points to a sampling fault) of the episode that reached the fixed
   * limit that opened or escalated an incident (not an advisory).
   */
  readonly earliest?: FirstFinding;
  /** Samples from the earliest finding up to (not including) the fixed limit's sample. */
  readonly samplesAhead?: number;
  readonly daysAhead?: number;
}

export interface TimelineInput {
  readonly unit: string;
  readonly component: string;
  /** Every distinct sample of the component. */
  readonly sampleDates: readonly { readonly sampleId: string; readonly sampledAt: string }[];
  readonly steps: readonly StepRecord[];
  /**
   * Consecutive samples without a rising finding that end an episode, as incidents.returnAfterSamples ends an
   * incident. Default 2.
   */
  readonly returnAfterSamples?: number;
}

type Dated = { readonly sampledAt: string; readonly sampleId: string };
const byDate = (a: Dated, b: Dated) =>
  a.sampledAt < b.sampledAt ? -1 : a.sampledAt > b.sampledAt ? 1 : a.sampleId < b.sampleId ? -1 : a.sampleId > b.sampleId ? 1 : 0;

export function componentTimeline(input: TimelineInput): ComponentTimeline {
  const steps = [...input.steps].sort(byDate);
  const samples = [...new Map(input.sampleDates.map((s) => [s.sampleId, s])).values()].sort(byDate);
  const base = { unit: input.unit, component: input.component, samples: samples.length };
  const limitStep = steps.find((st) => st.findings.some((f) => f.rule === 'limit'));
  if (limitStep === undefined) return { ...base, firsts: firstsOf(steps) };

  // The episode: walk back from the fixed limit's sample while fewer than returnAfterSamples clean samples
  // separate rising findings, so that a false alarm months earlier is not counted as an early warning.
  const rising = new Map(steps.map((st) => [st.sampleId, st.findings.some((f) => f.direction !== 'down')]));
  const gap = input.returnAfterSamples ?? 2;
  let at = samples.findIndex((s) => s.sampleId === limitStep.sampleId);
  let start = at;
  let clean = 0;
  while (--at >= 0 && clean < gap) {
    if (rising.get(samples[at]!.sampleId) === true) {
      start = at;
      clean = 0;
    } else clean++;
  }
  const from = samples[start] ?? limitStep;
  const episode = steps.filter((st) => byDate(st, from) >= 0);
  const firsts = firstsOf(episode);
  const fixedLimit = firsts.find((f) => f.rule === 'limit')!;
  const earliest = firstIncidentRise(episode) ?? fixedLimit;
  const samplesAhead = samples.filter((s) => byDate(s, earliest) >= 0 && byDate(s, fixedLimit) < 0).length;
  const daysAhead = Math.round((Date.parse(fixedLimit.sampledAt) - Date.parse(earliest.sampledAt)) / 86_400_000);
  return { ...base, firsts, fixedLimit, earliest, samplesAhead, daysAhead };
}

function firstsOf(steps: readonly StepRecord[]): FirstFinding[] {
  const firsts = new Map<string, FirstFinding>();
  for (const step of steps) {
    for (const f of step.findings) {
      const key = `${f.rule}${f.direction === 'down' ? ':down' : ''}`;
      if (!firsts.has(key)) firsts.set(key, firstOf(f, step));
    }
  }
  return [...firsts.values()].sort(byDate);
}

/** The first rising finding, in sample order, that opens or escalates an incident. */
function firstIncidentRise(steps: readonly StepRecord[]): FirstFinding | undefined {
  for (const step of steps) {
    const f = step.findings.find((x) => x.direction !== 'down' && x.disposition === 'incident' && x.rule !== 'sampling');
    if (f !== undefined) return firstOf(f, step);
  }
  return undefined;
}

function firstOf(f: Finding, step: StepRecord): FirstFinding {
  return {
    rule: f.rule,
    measurand: f.measurand,
    severity: f.severity,
    ...(f.direction && { direction: f.direction }),
    disposition: f.disposition,
    sampleId: step.sampleId,
    sampledAt: step.sampledAt,
  };
}

const RULE_LABEL: Record<RuleFamily, string> = RULE_FAMILY_LABELS;

/**
 * e.g. "Fe group limit caution (advisory) 2026-03-17 · Fe CUSUM watch 2026-03-25 · Fe rate limit caution 2026-05-26 ·
 * Fe fixed limit caution 2026-06-06 → caught 7 samples (72 days) before the fixed limit"
 */
export function formatTimeline(t: ComponentTimeline): string {
  if (t.firsts.length === 0) return 'no findings';
  const parts = t.firsts.map((f) => `${f.measurand} ${RULE_LABEL[f.rule]}${f.direction === 'down' ? ' (fall)' : ''} ${f.severity}${f.disposition === 'advisory' ? ' (advisory)' : ''} ${f.sampledAt.slice(0, 10)}`);
  return `${parts.join(' · ')}${verdict(t)}`;
}

function verdict(t: ComponentTimeline): string {
  if (t.fixedLimit === undefined) return t.firsts.length > 0 ? ' → no fixed limit crossed in the demo period' : '';
  if (t.samplesAhead === undefined || t.samplesAhead === 0) return ' → first seen at the fixed limit';
  return ` → caught ${t.samplesAhead} sample${t.samplesAhead === 1 ? '' : 's'} (${t.daysAhead} days) before the fixed limit`;
}
