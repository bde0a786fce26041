/**
 * The `ewma` and `cusum` rule families: change detection on the standardised prediction errors of each
 * detection measurand (see fold/changeTrack.ts). In control the errors are independent N(0, 1), so the chart
 * limits come straight from run-length design (budget.ts). An upward signal is a `watch` finding that opens an
 * incident: a change is detected, no limit is crossed. A fall is reported too (two-sided), but as a finding of
 * the `sampling` family (check `rate-fall`): a wear rate does not fall by itself; it points at a sampling fault,
 * an unreported oil change or a mixed-up bottle, which is for whoever takes the samples, not for the machine's
 * on-call engineer.
 */
import type { Finding } from '../../domain/finding.ts';
import { MEASURANDS, originOf, type Measurand } from '../../domain/measurands.ts';
import type { ComponentSettings } from '../../domain/settings.ts';
import { ownBaselineSpan, type ChangePoint, type ChangeTrack } from '../fold/changeTrack.ts';
import { findingAt, type SampleInput } from './ruleInput.ts';

export function changeVerdicts(input: SampleInput, points: readonly ChangePoint[], tracks: Readonly<Partial<Record<Measurand, ChangeTrack>>>): Finding[] {
  const { settings } = input;
  const out: Finding[] = [];
  for (const p of points) {
    const m = p.interval.measurand;
    const track = tracks[m];
    const report = (rule: 'ewma' | 'cusum', direction: 'up' | 'down', value: number, threshold: number) => {
      if (direction === 'down' && settings.detection.sided !== 'two') return;
      const common = { measurand: m, severity: 'watch' as const, value: round(value), threshold: round(threshold), basis: rule, direction };
      out.push(
        findingAt(
          input,
          input.sample,
          direction === 'up'
            ? { ...common, rule, disposition: 'incident', explanation: explainRise(m, rule, value, threshold, p, track, settings) }
            : { ...common, rule: 'sampling', check: 'rate-fall', disposition: 'incident', explanation: explainFall(m, rule, value, threshold, p, track, settings) },
        ),
      );
    };
    if (p.cusum !== undefined) {
      if (p.cusum.upper > p.cusum.h) report('cusum', 'up', p.cusum.upper, p.cusum.h);
      if (p.cusum.lower > p.cusum.hFall) report('cusum', 'down', p.cusum.lower, p.cusum.hFall);
    }
    if (p.ewma !== undefined) {
      if (p.ewma.value > p.ewma.ucl) report('ewma', 'up', p.ewma.value, p.ewma.ucl);
      if (p.ewma.value < p.ewma.lcl) report('ewma', 'down', p.ewma.value, p.ewma.lcl);
    }
  }
  return out;
}

function statistic(rule: 'ewma' | 'cusum', value: number, threshold: number): string {
  return rule === 'cusum' ? `CUSUM ${fmt(value)} beyond its decision interval ${fmt(threshold)}` : `EWMA ${fmt(value)} beyond its limit ${fmt(threshold)}`;
}

/**
 * Where the in-control rate the interval was judged against comes from, in words. The rate is the filter's, learnt for
 * this component from its readings: against a group baseline it starts from the group's rate and moves towards this
 * component's own, so the text names both when they differ.
 */
export function baselineProvenance(p: ChangePoint, track: ChangeTrack | undefined, settings: ComponentSettings): string {
  const m = p.interval.measurand;
  const own = track?.own;
  const rate = perHundredHours(m, p.baselineRate);
  let text: string;
  if (p.source === 'own' && own?.completedSampleId !== undefined) {
    const held = p.learningPaused && track?.signalSince !== undefined;
    text =
      `the reference rate ${rate}: what this component's own ${ownBaselineSpan(own)} showed, ` +
      (held ? `updated with later samples and held since sample ${track.signalSince!.sampleId} where the change was first signalled` : 'updated with each sample since') +
      ` (its usual rate, not a proven healthy one: a slow change before then may be in it)`;
    return text;
  }
  const have = own?.sums.intervals ?? 0;
  const ownProgress = `this component's own baseline has ${have} of ${settings.detection.baselineIntervals} intervals`;
  const groupRate = perHundredHours(m, p.sourceRate);
  text =
    rate === groupRate
      ? `the reference rate ${rate} of group ${settings.group}, typical of its components, not of this one (${ownProgress})`
      : `the reference rate ${rate}, learnt for this component from its readings starting from group ${settings.group}'s rate of ${groupRate} (${ownProgress})`;
  if (p.learningPaused && track?.signalSince !== undefined) text += `, held since sample ${track.signalSince.sampleId} where the change was first signalled`;
  return text;
}

/** A wear rate per 100 operating hours in the measurand's unit from the catalogue: "4.2 ppm/100 h", "3 index points/100 h" (PQ). */
export function perHundredHours(m: Measurand, ratePerHour: number): string {
  const unit: string = MEASURANDS[m].unit;
  return `${fmt(ratePerHour * 100)} ${unit === 'index' ? 'index points' : unit}/100 h`;
}

function explainRise(m: Measurand, rule: 'ewma' | 'cusum', value: number, threshold: number, p: ChangePoint, track: ChangeTrack | undefined, settings: ComponentSettings): string {
  const origin = originOf(m);
  return (
    `${m} (${MEASURANDS[m].label}) is accumulating faster than before: ${statistic(rule, value, threshold)}; the latest interval gained ` +
    `${perHundredHours(m, p.interval.rate)} against ${baselineProvenance(p, track, settings)}. ` +
    `It may point to ${origin ?? 'the parts this metal comes from'} wearing faster, or to a change in sampling or duty; next: re-sample to confirm (same sample point, machine at working temperature), and ask the lab to review the trend.` +
    residualHint(p, settings, 'more')
  );
}

/**
 * At the first sample after an oil change judged with the built-in residual share: a share far from the real one
 * biases that interval by the difference times the previous charge's level, so the explanation says which setting
 * removes the doubt (BENCHMARKS.md: a 30 % residual judged at 10 % makes healthy gearboxes signal).
 */
function residualHint(p: ChangePoint, settings: ComponentSettings, direction: 'more' | 'less'): string {
  const iv = p.interval;
  if (settings.residualFractionDefaulted !== true || !iv.firstOfCharge || !(iv.carryOver > 0)) return '';
  return (
    ` This is the first sample after an oil change, judged as if ${fmt(iv.carryOver * 100)} % of the old oil stayed in the sump (the built-in share: group ${settings.group} sets no residualFraction); ` +
    `if ${direction} of it stays behind, set residualFraction for the group and this interval reads differently.`
  );
}

function explainFall(m: Measurand, rule: 'ewma' | 'cusum', value: number, threshold: number, p: ChangePoint, track: ChangeTrack | undefined, settings: ComponentSettings): string {
  return (
    `${m} (${MEASURANDS[m].label}) is rising more slowly than this component's wear can explain: ${statistic(rule, value, threshold)}; the latest interval gained ` +
    `${perHundredHours(m, p.interval.rate)} against ${baselineProvenance(p, track, settings)}. ` +
    'A wear rate does not fall by itself: check the sample point and the oil-change records (an unreported drain or top-up), and ask the lab.' +
    residualHint(p, settings, 'less')
  );
}

function round(x: number): number {
  return Math.round(x * 1000) / 1000;
}

function fmt(x: number): string {
  return Number(x.toPrecision(3)).toString();
}
