/** The shapes the pure analysis core hands between its stages. */
import type { Sample } from '../domain/event.ts';
import type { Finding } from '../domain/finding.ts';
import type { Measurand } from '../domain/measurands.ts';

/** One charge: the oil between two oil changes. Wear-metal series restart at every new charge. */
export interface Charge {
  readonly index: number;
  /** componentChanged: the component was replaced or overhauled; none of the old charge's metal is carried over. */
  readonly startedBy: 'first' | 'oilChanged' | 'oilHoursReset' | 'componentChanged';
  /** In time order. */
  readonly samples: readonly Sample[];
}

/** A revision that a higher revision of the same sample replaced; kept so that the history says so. */
export interface Superseded {
  readonly sampleId: string;
  readonly revision: number;
  readonly replacedBy: number;
}

/** A component's history: the winning revision of every sample, in time order, split into charges. */
export interface ComponentHistory {
  readonly unit: string;
  readonly component: string;
  readonly samples: readonly Sample[];
  readonly charges: readonly Charge[];
  readonly superseded: readonly Superseded[];
}

/** One wear-metal interval on one charge: from the previous sample (or the residual of the last charge) to `to`. */
export interface Interval {
  readonly measurand: Measurand;
  readonly chargeIndex: number;
  readonly to: Sample;
  /** Sample the interval starts from; for the first sample of a charge, the last sample of the previous charge. */
  readonly from?: { readonly sampleId: string; readonly sampledAt: string };
  readonly firstOfCharge: boolean;
  /** Operating hours of the interval. */
  readonly hours: number;
  /**
   * Share of the previous reading that remains at the end with no wear: 1 − topUp/sump on one charge (1 without
   * a sump volume), the residual fraction after a drain, 0 when the previous reading belongs to a replaced component.
   */
  readonly carryOver: number;
  /** Concentration expected at the end with no wear: carryOver × the previous reading. */
  readonly baseLevel: number;
  /** Reading at the end of the interval (ppm). */
  readonly level: number;
  /** level − baseLevel: wear metal added in the interval, in ppm of the sump. */
  readonly increment: number;
  /** increment / hours, in ppm per hour. */
  readonly rate: number;
  /** True when either end is a censored reading: such an interval never raises a finding on its own. */
  readonly censored: boolean;
  /** True while the component is running in (new or overhauled): kept out of baselines. */
  readonly runningIn: boolean;
}

/** Population statistics of one oil-hours band of one measurand in one group. */
export interface BandStats {
  /** Lower edge (inclusive) and upper edge (exclusive; null: open-ended) in oil hours. */
  readonly fromHours: number;
  readonly toHours: number | null;
  readonly n: number;
  readonly mean: number;
  readonly sd: number;
  /** Sorted values, present when the percentile method needs them. */
  readonly values?: readonly number[];
}

/** In-control wear rate of a group, pooled from its components' stable history. */
/** What a group tells of its units' wear-process variance: the variance within units, pooled, and its degrees of freedom. */
export interface ProcessVariancePrior {
  /** ppm²/h. */
  readonly processVariance: number;
  readonly degrees: number;
}

export interface RateBaseline {
  /** ppm per operating hour. */
  readonly rate: number;
  /** Variance of the wear process per hour (ppm²/h). */
  readonly processVariance: number;
  /**
   * How uncertain `rate` is for one component, (ppm/h)²: 0 for a component's own baseline; for a group
   * baseline, the spread of the wear rate from unit to unit. Above 0, the filter learns the component's rate.
   */
  readonly rateVariance?: number;
  /** How fast the component's rate may wander, (ppm/h)² per hour; above 0, the filter keeps learning it. */
  readonly rateDrift?: number;
  /** For a group baseline: the spread of the pooled components' own rates on a log scale (ln ppm/h). */
  readonly peers?: { readonly components: number; readonly meanLogRate: number; readonly sdLogRate: number };
  /** For a group baseline: the wear-process variance within its units (baseline.ts withinProcessVariance). */
  readonly within?: ProcessVariancePrior;
  readonly intervals: number;
  readonly components: number;
}

/**
 * Sufficient statistics of one component's baseline intervals for one measurand, so that a group baseline can
 * be pooled from stored sums without reading every component's history again.
 */
export interface BaselineSums {
  readonly intervals: number;
  readonly sumHours: number;
  readonly sumHoursSq: number;
  readonly sumIncrement: number;
  readonly sumIncrementSq: number;
  readonly sumIncrementHours: number;
  /** Sum over intervals of the lab variance of both end readings. */
  readonly sumLabVariance: number;
}

export interface GroupStats {
  readonly group: string;
  readonly bands: Readonly<Partial<Record<Measurand, readonly BandStats[]>>>;
  readonly baselines: Readonly<Partial<Record<Measurand, RateBaseline>>>;
}

/**
 * How a sample stands with the analysis: `accepted`; `in-doubt` (a sampling check fired: kept out of the wear
 * analysis, baselines and group statistics, other findings held); `confirmed` (a responder said the sample is
 * genuine: accepted, no sampling checks); `rejected` (a responder said it is wrong: left out entirely).
 */
export type SampleStatus = 'accepted' | 'in-doubt' | 'confirmed' | 'rejected';

/**
 * What a responder said of a sample: of a sample in doubt, `confirmed` or `rejected`; of a sample at which EWMA or
 * CUSUM signal a rise, `usual-rate`: the wear rate seen there is this component's usual one (a baseline learnt low,
 * not a change), so the change detectors of each measurand signalling a rise learn a new own baseline from that sample
 * on (changeTrack.ts `restartChange`). A `usual-rate` sample goes through the sampling checks as any other.
 */
export type SampleMark = 'confirmed' | 'rejected' | 'usual-rate';

/** The findings at one sample of the history. */
export interface Step {
  readonly sampleId: string;
  readonly sampledAt: string;
  readonly findings: readonly Finding[];
  /** Absent when the sample was accepted. */
  readonly status?: Exclude<SampleStatus, 'accepted'>;
}

export interface Evaluation {
  readonly history: ComponentHistory;
  /** One step per sample, in time order; the last is the component's current state. */
  readonly steps: readonly Step[];
  /** The component's own baseline sums per detection measurand, once its baseline is complete. */
  readonly baselines: Readonly<Partial<Record<Measurand, BaselineSums>>>;
}
