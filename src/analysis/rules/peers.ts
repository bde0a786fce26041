/**
 * The `population` family on the wear rate: a component's own in-control rate compared with those of the other
 * units of its group (like-for-like). The change detectors judge a component against its own past, so a unit that
 * wore fast from the start looks steady to them; its peers show it.
 *
 * The comparison is one per component life, made once the own baseline is complete (and again when the peers'
 * figures change, as of each sample's sampling time): the component is flagged when its log rate lies above the
 * peers' upper prediction limit, mean + t₁₋α,ₙ₋₁ · sd · √(1 + 1/n) of the n peers' log rates (the limit a new unit
 * exchangeable with them stays under with probability 1 − α; Student's t from its Cornish–Fisher expansion), with α
 * the share of the false-alarm budget given to this check per component-year (population.peers.budgetShare ×
 * detection.budget.alarms / years) shared by the watched metals, each compared on its own (Bonferroni: a component
 * with 7 metals compared at α each would be flagged up to 7 times as often as the budget allows), and its rate is at
 * least population.peers.minRatio times the peers' typical rate. It fires once, when the comparison first turns (one
 * incident, not a standing one), and re-arms only after the rate has come back 0.5 standard deviations inside the
 * limit.
 */
import { probit } from 'simple-statistics';
import type { Finding } from '../../domain/finding.ts';
import { MEASURANDS, originOf, type Measurand } from '../../domain/measurands.ts';
import type { ComponentSettings } from '../../domain/settings.ts';
import type { RateBaseline } from '../model.ts';
import { ownBaselineSpan, type OwnBaselineState } from '../fold/changeTrack.ts';
import { perHundredHours } from './change.ts';
import { findingAt, formatNumber, type SampleInput } from './ruleInput.ts';

/**
 * Probability that one watched metal of a healthy component is flagged, per component life (taken as one year): the
 * check's part of the budget shared by the detection measurands, so that the component's chance stays within it.
 */
export function peerAlpha(settings: ComponentSettings): number {
  const { budget, measurands } = settings.detection;
  return Math.min(0.5, (settings.population.peers.budgetShare * budget.alarms) / budget.years) / Math.max(1, measurands.length);
}

/**
 * Student's t quantile by the Cornish–Fisher expansion in 1/ν of the normal quantile (Abramowitz & Stegun 26.7.5,
 * from memory): within 1 % of the tables from ν = 4 at the tail probabilities used here.
 */
export function studentT(p: number, df: number): number {
  const z = probit(p);
  const z3 = z ** 3;
  const z5 = z ** 5;
  const z7 = z ** 7;
  return z + (z3 + z) / (4 * df) + (5 * z5 + 16 * z3 + 3 * z) / (96 * df ** 2) + (3 * z7 + 19 * z5 + 17 * z3 - 15 * z) / (384 * df ** 3);
}

/** The prediction limit in peer standard deviations (log scale) for n peers. */
export function peerLimitZ(settings: ComponentSettings, peers: number): number {
  return studentT(1 - peerAlpha(settings), Math.max(1, peers - 1)) * Math.sqrt(1 + 1 / peers);
}

/** How far the rate lies above its peers, in peer standard deviations (log scale); undefined when no comparison can be made. */
export function peerScore(ownRate: number, peers: RateBaseline['peers'], settings: ComponentSettings): number | undefined {
  if (peers === undefined || peers.components < settings.population.peers.minComponents || !(peers.sdLogRate > 0) || !(ownRate > 0)) return undefined;
  return (Math.log(ownRate) - peers.meanLogRate) / peers.sdLogRate;
}

export interface PeerVerdict {
  readonly finding?: Finding;
  /** Whether the component stands flagged after this sample (for the edge trigger). */
  readonly flagged: boolean;
}

export function peerVerdict(input: SampleInput, m: Measurand, own: OwnBaselineState, peers: RateBaseline['peers'], flagged: boolean): PeerVerdict {
  const { settings } = input;
  if (!settings.population.peers.enabled || own.completedAt === undefined || own.sums.sumHours <= 0) return { flagged };
  const ownRate = own.sums.sumIncrement / own.sums.sumHours;
  const score = peerScore(ownRate, peers, settings);
  if (score === undefined) return { flagged };
  const limit = peerLimitZ(settings, peers!.components);
  if (flagged) return { flagged: score > limit - 0.5 };
  const peerRate = Math.exp(peers!.meanLogRate);
  const ratio = ownRate / peerRate;
  if (score <= limit || ratio < settings.population.peers.minRatio) return { flagged: false };
  const origin = originOf(m);
  return {
    flagged: true,
    finding: findingAt(input, input.sample, {
      measurand: m,
      rule: 'population',
      disposition: 'incident',
      severity: 'caution',
      value: round(score),
      threshold: round(limit),
      basis: 'peer rate',
      explanation:
        `${m} (${MEASURANDS[m].label}) wears ${formatNumber(ratio)} times as fast as the other ${peers!.components} units of group ${settings.group}: ` +
        `its own usual rate ${perHundredHours(m, ownRate)}, learnt from its ${ownBaselineSpan(own)}, against their typical ` +
        `${perHundredHours(m, peerRate)}, ${formatNumber(score)} standard deviations above their mean on a log scale (prediction limit ${formatNumber(limit)}). ` +
        `It points to ${origin ?? 'the parts this metal comes from'} wearing faster than on like-for-like units; next: ask the lab to review the history ` +
        'and compare the unit\u2019s duty, oil and filtration with its peers.',
    }),
  };
}

function round(x: number): number {
  return Math.round(x * 1000) / 1000;
}
