/**
 * Change detection on one detection measurand, one interval at a time: the Kalman filter of level and rate,
 * the component's own baseline as it forms, and the EWMA and CUSUM of the standardised prediction errors. Each
 * life of the component (between replacements) starts afresh.
 *
 * The concentration on a charge follows a local level model: the level grows by g·h over h operating hours plus
 * a wear-process disturbance of variance q·h, make-up oil and drains scale the carried-over level by the
 * interval's carry-over share, and each reading adds lab noise. A Kalman filter predicts every reading from the
 * history before it; the prediction error divided by its standard deviation is N(0, 1) and independent from
 * sample to sample while the wear rate stays at g (in control). Plain standardised increments
 * (Δc − g·Δh)/sd are the special case without lab noise; with lab noise, consecutive increments share a reading
 * and are negatively correlated, which would make run-length designs for independent data wrong.
 * A shift of the wear rate to g + δ gives prediction errors with a positive mean (δ·h at first, growing to
 * δ·h/K as the filter settles, K being its gain), which the detectors accumulate.
 *
 * The component's rate is a state of the filter too. Against a group baseline (while the own history is short)
 * it starts from the group's rate with the unit-to-unit spread as its variance and is learnt from the readings,
 * so the errors stay N(0, 1) for a unit whose rate is anywhere in the group's spread. Once the own baseline is
 * complete it restarts from the own estimate with that estimate's uncertainty and a slow drift, so the filter
 * keeps refining it over a long memory: a real shift shows for many samples before it is learnt, while the first
 * estimate's error does not stay frozen into a standing bias. The wear-process variance is refined the same way,
 * by the stable intervals after the baseline (none while an upward change is signalled; baseline.ts), and weighed
 * with the variance within the units of its group where the group is trusted (baseline.ts withinProcessVariance).
 *
 * While an upward change is signalled, the filter does not learn the rate from the intervals that raise it:
 * the in-control rate stays what it was learnt from before the change, so a sustained shift stays flagged for
 * as long as it lasts instead of being absorbed into the baseline; nor does an own baseline still forming take them.
 * Learning resumes once both detectors are back within their limits.
 */
import type { Detection } from '../../domain/config.ts';
import { addInterval, EMPTY_SUMS, OWN_RATE_MEMORY, ownRateBaseline } from '../baseline.ts';
import { cusumStart, cusumStep, type CusumState } from '../cusum.ts';
import { ewmaLimitFactor } from '../ewma.ts';
import { labVariance } from '../labNoise.ts';
import type { BaselineSums, Interval, RateBaseline } from '../model.ts';
import { incrementLabVariance, isStable } from '../ownBaseline.ts';

/** Level and rate with their covariance. */
export interface FilterState {
  readonly level: number;
  readonly variance: number;
  readonly rate: number;
  readonly covariance: number;
  readonly rateVariance: number;
}

/** Where the in-control rate comes from: the component's own stable history, its group, or nowhere yet. */
export type BaselineSource = 'own' | 'group' | null;

/** The samples the own baseline was learnt from. */
export interface OwnBaselineState {
  readonly sums: BaselineSums;
  /**
   * Where the baseline's first interval starts: the sample before it, or new oil when the interval started from fresh
   * oil (a new component: no earlier reading counts). Absent in states stored before it was recorded (see firstSampleId).
   */
  readonly start?: { readonly sampleId: string; readonly sampledAt: string } | 'new oil';
  /**
   * In states stored before `start` was recorded: the sample that *ended* the baseline's first interval (one sample
   * later than where the baseline starts). Read for those states only; no longer written.
   */
  readonly firstSampleId?: string;
  readonly firstSampledAt?: string;
  /** Set once complete: the interval (index) and sample that completed it. */
  readonly completedAt?: number;
  readonly completedSampleId?: string;
  readonly completedSampledAt?: string;
  /**
   * Stable intervals after the baseline was complete, taken while no upward change is signalled, until the baseline
   * and these together hold OWN_RATE_MEMORY baselines' worth: they go on refining the wear-process variance.
   */
  readonly later?: BaselineSums;
}

export interface ChangeTrack {
  /** Intervals of the measurand seen so far (the index of the next one). */
  readonly intervals: number;
  /** Component life, from 0; −1 before the first interval. */
  readonly life: number;
  readonly own: OwnBaselineState;
  readonly filter?: FilterState;
  readonly previousTo?: string;
  readonly previousSource: BaselineSource;
  /** The last interval's end reading, to restart the filter at a new life. */
  readonly last?: { readonly level: number; readonly censored: boolean };
  readonly cusum: CusumState;
  readonly ewma: { readonly value: number; readonly n: number };
  /** The sample where the present upward signal began; rate learning is paused while it lasts. */
  readonly signalSince?: { readonly sampleId: string; readonly sampledAt: string };
  /** The comparison with peers stands flagged in this life (rules/peers.ts). */
  readonly peerFlagged?: boolean;
  /**
   * The sample at which a responder's word that the rate is the component's usual one started this life
   * (`restartChange`): until the own baseline is complete again nothing is judged (the group's rate, which the unit's rate
   * may sit well above, is not used), so that the new baseline forms from the unit's own intervals.
   */
  readonly restartedAt?: { readonly sampleId: string; readonly sampledAt: string };
}

/** The rise side's limits and the fall side's (budget.ts changeDesign: each side has its part of the budget). */
export interface DetectorLimits {
  readonly cusumH: number;
  readonly ewmaL: number;
  readonly cusumHFall: number;
  readonly ewmaLFall: number;
}

/** What the detectors saw at one interval. */
export interface ChangePoint {
  readonly interval: Interval;
  readonly life: number;
  /** Standardised prediction error. */
  readonly z: number;
  /**
   * The in-control rate the interval was judged against (in the measurand's unit per hour): the filter's rate, learnt
   * for this component from its readings starting from its source's rate.
   */
  readonly baselineRate: number;
  readonly source: 'own' | 'group';
  /** The source's own rate (per hour): the group's pooled rate, or the rate of the component's own baseline. */
  readonly sourceRate: number;
  /** h: the upper statistic's decision interval; hFall: the lower one's. */
  readonly cusum?: { readonly upper: number; readonly lower: number; readonly h: number; readonly hFall: number };
  readonly ewma?: { readonly value: number; readonly ucl: number; readonly lcl: number };
  /** True while the filter's rate learning is paused by an upward signal. */
  readonly learningPaused: boolean;
}

export function emptyChangeTrack(detection: Detection): ChangeTrack {
  return {
    intervals: 0,
    life: -1,
    own: { sums: EMPTY_SUMS },
    previousSource: null,
    cusum: cusumStart({ k: detection.cusum.k, h: 1, headstart: 0 }),
    ewma: { value: 0, n: 0 },
  };
}

/** A level known from one reading (its uncertainty is the lab's), the rate as the baseline gives it. */
function settled(level: number, noise: Detection['labNoise'], baseline: RateBaseline | undefined): FilterState {
  return { level, variance: labVariance(noise, level), ...baselineRate(baseline) };
}

function baselineRate(b: RateBaseline | undefined): Pick<FilterState, 'rate' | 'covariance' | 'rateVariance'> {
  return { rate: b?.rate ?? 0, covariance: 0, rateVariance: b?.rateVariance ?? 0 };
}

export interface ChangeInput {
  readonly detection: Detection;
  readonly limits: DetectorLimits;
  /** The group baseline that applies at this interval, when trusted. */
  readonly group: RateBaseline | undefined;
  /** Hold the rate while an upward change is signalled (see the module comment). */
  readonly holdRateWhileSignalling: boolean;
}

/**
 * One interval through the track. Returns the new track and, when the interval was judged, the point the
 * detectors saw.
 */
export function advanceChange(t: ChangeTrack, iv: Interval, input: ChangeInput): { track: ChangeTrack; point?: ChangePoint } {
  const { detection, limits } = input;
  const noise = detection.labNoise;
  const index = t.intervals;
  let track: ChangeTrack = t;
  // A new life: the own baseline, the filter and the detectors start again.
  if (index === 0 || iv.to.componentChanged) track = nextLife(t, input, index > 0);
  const own = track.own;
  // A life a responder's word restarted judges against its own new baseline only, once complete (`restartedAt`); the
  // group still speaks for the wear process's variance within units.
  const group = track.restartedAt !== undefined ? undefined : input.group;
  const ownRate = own.completedAt !== undefined ? ownRateBaseline(own.sums, detection.budget.sampleIntervalHours, own.later, input.group?.within) : undefined;
  const source: BaselineSource = ownRate !== undefined && index > own.completedAt! ? 'own' : group !== undefined ? 'group' : null;
  const baseline = source === 'own' ? ownRate : source === 'group' ? group : undefined;
  const continuous = track.filter !== undefined && iv.from !== undefined && iv.from.sampleId === track.previousTo;
  const switched = source !== track.previousSource;
  const paused = input.holdRateWhileSignalling && track.signalSince !== undefined;
  const common = { intervals: index + 1, previousTo: iv.to.sampleId, previousSource: source, last: { level: iv.level, censored: iv.censored }, own: grownOwn(own, iv, index, detection, paused) };

  if (iv.runningIn || baseline === undefined) {
    const { filter: _f, ...rest } = track;
    return { track: { ...rest, ...common, ...(!iv.censored && { filter: settled(iv.level, noise, baseline) }) } };
  }
  let state = track.filter;
  if (!continuous || state === undefined) {
    if (iv.censored) {
      const { filter: _f, ...rest } = track;
      return { track: { ...rest, ...common } };
    }
    const from = iv.carryOver === 0 ? { level: 0, variance: 0 } : settled(iv.baseLevel / iv.carryOver, noise, baseline);
    state = { ...from, ...baselineRate(baseline) };
  } else if (switched) {
    state = { ...state, ...baselineRate(baseline) };
  }
  const c = iv.carryOver;
  const h = iv.hours;
  // While an upward change is signalled the rate is held: no drift, no learning from these intervals.
  const rateVariance = paused ? state.rateVariance : state.rateVariance + (baseline.rateDrift ?? 0) * h;
  const predicted = c * state.level + h * state.rate;
  const predictedVariance = c * c * state.variance + 2 * c * h * state.covariance + h * h * rateVariance + baseline.processVariance * h;
  const predictedCovariance = c * state.covariance + h * rateVariance;
  if (iv.censored) {
    // A censored reading tells too little to update on; time still passes.
    const filter = { ...state, level: predicted, variance: predictedVariance, covariance: predictedCovariance, rateVariance };
    return { track: { ...track, ...common, filter } };
  }
  const errorVariance = predictedVariance + labVariance(noise, iv.level);
  const error = iv.level - predicted;
  const filter: FilterState = paused
    ? {
        // The level follows the readings; the rate and its uncertainty stay as they were before the change.
        level: predicted + (predictedVariance / errorVariance) * error,
        variance: predictedVariance - predictedVariance ** 2 / errorVariance,
        rate: state.rate,
        covariance: 0,
        rateVariance: state.rateVariance,
      }
    : {
        level: predicted + (predictedVariance / errorVariance) * error,
        variance: predictedVariance - predictedVariance ** 2 / errorVariance,
        rate: state.rate + (predictedCovariance / errorVariance) * error,
        covariance: predictedCovariance - (predictedVariance * predictedCovariance) / errorVariance,
        rateVariance: rateVariance - predictedCovariance ** 2 / errorVariance,
      };
  const z = error / Math.sqrt(errorVariance);

  let cusumState = track.cusum;
  let cusumOut: ChangePoint['cusum'];
  if (detection.cusum.enabled) {
    const next = cusumStep(cusumState, z, { k: detection.cusum.k, h: limits.cusumH, headstart: detection.cusum.headstart });
    cusumState = { upper: next.upper, lower: next.lower };
    cusumOut = { upper: next.upper, lower: next.lower, h: limits.cusumH, hFall: limits.cusumHFall };
  }
  let ewmaState = track.ewma;
  let ewmaOut: ChangePoint['ewma'];
  if (detection.ewma.enabled) {
    const n = ewmaState.n + 1;
    const value = detection.ewma.lambda * z + (1 - detection.ewma.lambda) * ewmaState.value;
    // The limits' width at sample n in sigma units; each side scales it by its own L.
    const factor = ewmaLimitFactor(detection.ewma.lambda, n, true);
    ewmaState = { value, n };
    ewmaOut = { value, ucl: limits.ewmaL * factor, lcl: -limits.ewmaLFall * factor };
  }
  const signalling = (cusumOut !== undefined && cusumOut.upper > cusumOut.h) || (ewmaOut !== undefined && ewmaOut.value > ewmaOut.ucl);
  const signalSince = signalling ? (track.signalSince ?? { sampleId: iv.to.sampleId, sampledAt: iv.to.sampledAt }) : undefined;
  const { signalSince: _s, ...rest } = track;
  return {
    track: { ...rest, ...common, filter, cusum: cusumState, ewma: ewmaState, ...(signalSince && { signalSince }) },
    point: {
      interval: iv,
      life: track.life,
      z,
      baselineRate: state.rate,
      source: source as 'own' | 'group',
      sourceRate: baseline.rate,
      ...(cusumOut && { cusum: cusumOut }),
      ...(ewmaOut && { ewma: ewmaOut }),
      learningPaused: paused,
    },
  };
}

/**
 * A responder's word, at the sample the track's last interval ended at, that the rate signalled there as a rise is the
 * component's usual one (a baseline learnt low, not a change): a new life starts after that interval, as at a
 * component change but with the filter following on from the last reading. Its own baseline forms from the stable
 * intervals after the word, and until it is complete nothing is judged (`restartedAt`: the group's rate, which this
 * unit's may sit well above, is not used); then the detectors judge against the new baseline.
 */
export function restartChange(t: ChangeTrack, at: { readonly sampleId: string; readonly sampledAt: string }, input: Pick<ChangeInput, 'detection' | 'limits'>): ChangeTrack {
  return { ...nextLife(t, input, true), intervals: t.intervals, ...(t.last && { last: t.last }), restartedAt: at };
}

/**
 * The next life of a track: an empty own baseline, the detectors at their start (a headstart is a fraction of each
 * side's own decision interval), the filter following on from the last reading when `followOn` (an uncensored one).
 */
function nextLife(t: ChangeTrack, { detection, limits }: Pick<ChangeInput, 'detection' | 'limits'>, followOn: boolean): ChangeTrack {
  const last = t.last;
  return {
    ...emptyChangeTrack(detection),
    life: t.life + 1,
    cusum: {
      upper: cusumStart({ k: detection.cusum.k, h: limits.cusumH, headstart: detection.cusum.headstart }).upper,
      lower: cusumStart({ k: detection.cusum.k, h: limits.cusumHFall, headstart: detection.cusum.headstart }).lower,
    },
    ...(followOn && last && !last.censored && { filter: settled(last.level, detection.labNoise, undefined) }),
    ...(t.previousTo !== undefined && { previousTo: t.previousTo }),
  };
}

/**
 * The own baseline takes the life's first stable intervals until it is complete (none while an upward change is
 * signalled against the group: it would take the faulty rate as the component's usual one); then it is fixed, and
 * later stable intervals go on refining the process variance (OwnBaselineState.later).
 */
function grownOwn(own: OwnBaselineState, iv: Interval, index: number, detection: Detection, paused: boolean): OwnBaselineState {
  if (!isStable(iv)) return own;
  // While a rise is signalled against the group, the forming baseline takes none of the intervals that raise it.
  if (paused && own.completedAt === undefined) return own;
  if (own.completedAt !== undefined) {
    const later = own.later ?? EMPTY_SUMS;
    if (paused || index <= own.completedAt || own.sums.intervals + later.intervals >= OWN_RATE_MEMORY * detection.baselineIntervals) return own;
    return { ...own, later: addInterval(later, iv, incrementLabVariance(iv, detection.labNoise)) };
  }
  const sums = addInterval(own.sums, iv, incrementLabVariance(iv, detection.labNoise));
  // The first interval taken: the baseline starts where it starts (its first reading), not at the sample ending it.
  const start = own.sums.intervals === 0 ? { start: intervalStart(iv) } : {};
  const base = { ...own, ...start, sums };
  return sums.intervals >= detection.baselineIntervals ? { ...base, completedAt: index, completedSampleId: iv.to.sampleId, completedSampledAt: iv.to.sampledAt } : base;
}

function intervalStart(iv: Interval): NonNullable<OwnBaselineState['start']> {
  return iv.carryOver === 0 || iv.from === undefined ? 'new oil' : { sampleId: iv.from.sampleId, sampledAt: iv.from.sampledAt };
}

/**
 * The samples a complete own baseline was learnt from, in words: "samples S00 to S12 (12 intervals)". A state stored
 * before the start was recorded knows only the sample that ended the first interval, and says so.
 */
export function ownBaselineSpan(own: OwnBaselineState): string {
  const n = `${own.sums.intervals} intervals`;
  const to = own.completedSampleId;
  if (own.start === 'new oil') return `samples since new oil up to ${to} (${n})`;
  if (own.start !== undefined) return `samples ${own.start.sampleId} to ${to} (${n})`;
  return own.firstSampleId === undefined ? `samples up to ${to} (${n})` : `samples up to ${to} (${n}, the first ending at ${own.firstSampleId})`;
}
