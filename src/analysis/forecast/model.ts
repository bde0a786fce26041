/**
 * What a time-to-limit forecast says: for each measurand with a configured limit, when its reading is expected
 * to cross that limit, as a central estimate with an interval (10th–90th percentile by default), or why not.
 * Plain JSON: it travels in incidents, the series API, messages and replay output.
 */
import type { Measurand } from '../../domain/measurands.ts';

/** Where the limit comes from. */
export type LimitSource = 'fixed' | 'population' | 'condition';

/**
 * - `crossing`: the central estimate falls within the horizon;
 * - `already`: the present estimate is beyond the limit already;
 * - `after-oil-change`: the central estimate lies beyond the planned oil change (or the horizon when none is set),
 *   or the trend does not head towards the limit;
 * - `not-enough-history`: the forecast would be unreliable (see `reason`).
 */
export const FORECAST_OUTCOMES = ['crossing', 'already', 'after-oil-change', 'not-enough-history'] as const;
export type ForecastOutcome = (typeof FORECAST_OUTCOMES)[number];

/** A time in three forms: oil hours on the present charge, operating hours from the latest sample, calendar date. */
export interface ForecastTime {
  readonly oilHours: number;
  readonly hoursFromNow: number;
  /** YYYY-MM-DD, UTC; absent when the hours run per day are unknown. */
  readonly date?: string;
}

export interface LimitForecast {
  readonly measurand: Measurand;
  readonly source: LimitSource;
  readonly severity: 'caution' | 'alarm';
  /** Which way the reading must move to cross: up through the level, or down through it (TBN, viscosity). */
  readonly side: 'above' | 'below';
  /** The level: at the central crossing for a population limit (it depends on the oil-hours band), else fixed. */
  readonly level: number;
  readonly outcome: ForecastOutcome;
  /** The central estimate (median) of the crossing; with `crossing`. */
  readonly central?: ForecastTime;
  /** The lower percentile of the crossing; absent when even that lies beyond the horizon. */
  readonly early?: ForecastTime;
  /** The upper percentile; absent when it lies beyond the horizon (the interval is open above). */
  readonly late?: ForecastTime;
  /**
   * Wear metals whose central crossing lies beyond the planned oil change: where the next charge would cross at the
   * same rate, starting from the residual oil left at the drain (oil hours on that charge); null: not within it either.
   */
  readonly nextCharge?: { readonly oilHours: number | null };
  /** With `not-enough-history`: why, in words. */
  readonly reason?: string;
  /** One sentence for people. */
  readonly text: string;
}

/** The trend a measurand's forecast starts from. */
export interface ForecastBasis {
  /** `filter`: the Kalman filter's level and rate; `filter-since-signal`: the filter's level with the rate of the
   * intervals since an upward change was signalled (the filter holds its rate then); `trend`: a straight line
   * fitted to the readings of the present charge (measurands the filter does not watch). */
  readonly method: 'filter' | 'filter-since-signal' | 'trend';
  readonly sampleId: string;
  readonly sampledAt: string;
  readonly oilHours: number;
  readonly level: number;
  /** Per operating hour. */
  readonly rate: number;
  readonly levelSd: number;
  readonly rateSd: number;
  /**
   * A wear metal the filter watches, with at least 2 judged intervals lately: the second trend the forecast weighs
   * beside the filter's (with `weight`): the latest reading carried on at the rate of the recent intervals, and
   * with 4 or more of them, that rate's steady change per hour (`rateChange`, ppm/h per hour).
   */
  readonly recent?: {
    readonly weight: number;
    readonly intervals: number;
    readonly hours: number;
    readonly level: number;
    readonly rate: number;
    readonly levelSd: number;
    readonly rateSd: number;
    readonly rateChange?: number;
    readonly rateChangeSd?: number;
  };
}

/** The projected level at one oil-hours point: median and the interval percentiles. */
export interface ProjectionPoint {
  readonly oilHours: number;
  /** When the component reaches these oil hours at its recent hours per day; absent when those are unknown. */
  readonly at?: string;
  readonly central: number;
  readonly low: number;
  readonly high: number;
}

export interface MeasurandForecast {
  readonly measurand: Measurand;
  readonly status: 'forecast' | 'not-enough-history';
  readonly reason?: string;
  /** Only when asked to forecast past the reliability gates: the gate this forecast would have stopped at. */
  readonly gatedBy?: string;
  readonly basis?: ForecastBasis;
  /** The projected level from the last reading to the horizon, for the dashed line and its band on the chart. */
  readonly projection: readonly ProjectionPoint[];
  readonly limits: readonly LimitForecast[];
}

export interface ComponentForecast {
  /** The latest sample: every "from now" counts from it. */
  readonly sampleId: string;
  readonly sampledAt: string;
  readonly oilHours: number | null;
  /** Operating hours per calendar day from recent samples; null when unknown. */
  readonly hoursPerDay: number | null;
  /**
   * The oil change in oil hours on the present charge: planned (the group's `chargeHours`), else expected from the
   * longest of the recent past charges when the present one has not outrun it; null when neither is known.
   */
  readonly chargeHours: number | null;
  readonly chargeHoursFrom: 'planned' | 'past-charges' | null;
  /** The last oil hours the forecast looks to. */
  readonly horizonOilHours: number | null;
  /** The interval's percentiles, e.g. [10, 90]. */
  readonly percentiles: readonly [number, number];
  readonly measurands: readonly MeasurandForecast[];
  /** "A forecast assumes the present trend continues" and the advisory caution. */
  readonly caution: string;
}
