/**
 * Time-to-limit forecasts for one component: a pure function of the fold's state after the latest sample (the
 * evaluation), its settings and its group's statistics. No clock: "now" is the latest sample, and calendar dates
 * come from the hours the component has run per day lately.
 *
 * A wear metal the change detectors watch is projected from the Kalman filter's level and rate on the present
 * charge with their covariance, the wear process's variance per hour and the rate's drift from the baseline the
 * filter runs with (fold/changeTrack.ts). While an upward change is signalled the filter holds its rate at the
 * pre-change value; the forecast then takes the rate of the intervals since the signal began (the ratio estimator
 * of baseline.ts), since that is the rate that continues. The wear process's variance the projection carries is the
 * component's own (method of moments) without the floor set for the detectors. Beside the filter's trend the
 * forecast weighs the recent trend: the latest reading carried on at the rate of the last judged intervals and its
 * steady change (recentTrend), with the posterior weight of that fit against the filter's rate; the central estimate
 * and the interval are the median and percentiles of the two together. On steady wear the filter's trend carries
 * almost all the weight; where the rate has changed, the recent trend does, before the detectors signal and while
 * a rising rate keeps rising after the signal. Any other measurand with a level to watch is projected
 * from a straight line fitted to the present charge's uncensored readings, its interval from Student's t with
 * n − 2 degrees of freedom. Make-up oil on the charge dilutes the projection (crossing.ts); the planned charge
 * length bounds it; for a wear metal whose crossing falls beyond the oil change, the residual-oil rule of
 * intervals.ts gives the level the next charge starts from.
 *
 * Where a forecast would mislead, it says "not enough history" with the reason: no reading or no oil hours on the
 * present charge; no wear-rate baseline yet (on a component's first charge, until its group has a trusted baseline
 * or its own is complete, the filter knows no rate); a censored latest reading or more than a third censored on the
 * charge; too few judged intervals or readings on the charge. bench/forecast.ts measures what these gates hide.
 * On a first charge with a trusted group baseline the filter starts from the group's rate with the unit-to-unit
 * spread as its uncertainty, and the benchmark finds the interval honest there, so it is stated.
 */
import { ADVISORY_CAUTION, FORECAST_CAUTION } from '../../domain/caution.ts';
import { DEFAULT_FORECAST, type ForecastConfig } from '../../domain/forecastConfig.ts';
import { MEASURANDS, type Measurand } from '../../domain/measurands.ts';
import type { ComponentSettings } from '../../domain/settings.ts';
import { ownRateBaseline } from '../baseline.ts';
import { labVariance } from '../labNoise.ts';
import { trustedGroupBaseline, type AnalysisState } from '../fold/analysisFold.ts';
import type { BaselineSums, GroupStats, RateBaseline } from '../model.ts';
import { crossingQuantile, mixtureCrossing, mixtureLevelQuantiles, projectAt, trendAt, type ProjectedTrend, type TrendMixture } from './crossing.ts';
import type { ForecastTrack, RecentInterval, UsagePoint } from './forecastTrack.ts';
import { limitSpecs, makeUpLevel, type LimitSpec } from './limits.ts';
import type { ComponentForecast, ForecastBasis, ForecastTime, LimitForecast, MeasurandForecast, ProjectionPoint } from './model.ts';
import { quantileFunction } from './quantile.ts';
import { forecastText, type WordingContext } from './wording.ts';

const DAY_MS = 86_400_000;
const CENSORED_LATEST = 'the latest reading is censored: a bound, not a value';
const TOO_MANY_CENSORED = 'more than a third of the readings on this charge are censored';
const PROJECTION_POINTS = 24;
/** The wear-process floor of baseline.ts that the forecast keeps: a tenth of a typical interval's wear as one standard deviation. */
const PROCESS_SPREAD_FLOOR = 0.1;
/** Recent intervals needed before the recent trend includes a change of the rate (else: a constant rate). */
const RECENT_MIN = 4;

export interface ForecastOptions {
  /** Only these measurands. Default: every measurand with a reading on the present charge and a level to watch. */
  readonly measurands?: readonly Measurand[];
  /**
   * Default true: say "not enough history" where the forecast is unreliable (first charge, censored readings, too
   * few intervals or readings). False forecasts there too and names the gate in `gatedBy` (the benchmark measures
   * what the gates hide).
   */
  readonly gates?: boolean;
  /**
   * Default true: the projection a chart draws (`projection`, PROJECTION_POINTS + 1 points with their interval). False
   * leaves it empty: an incident's evidence carries only the limits' forecasts (incidents/verdict.ts), so the
   * evaluation path does not work it out for every step that asks for an incident.
   */
  readonly projection?: boolean;
}

/** A trend ready to project, or why there is none. */
type Basis =
  | {
      readonly ok: true;
      readonly basis: ForecastBasis;
      readonly trend: ProjectedTrend;
      readonly rateDrift: number;
      readonly df?: number;
      readonly gate?: string;
      /** The same level carried on at the rate of the recent intervals (wear metals the filter watches). */
      readonly recent?: { readonly trend: ProjectedTrend; readonly hours: number; readonly intervals: number; readonly weight: number };
    }
  | { readonly ok: false; readonly reason: string };

export function forecastComponent(state: AnalysisState, settings: ComponentSettings, group: GroupStats | undefined, options: ForecastOptions = {}): ComponentForecast {
  const config = settings.forecast ?? DEFAULT_FORECAST;
  const track = state.forecast;
  const nowOil = state.charge?.lastOilHours ?? null;
  const past = Math.max(0, ...(track?.pastCharges ?? []));
  const expected = past > 0 && (nowOil === null || past > nowOil) ? past : null;
  const chargeHours = settings.chargeHours ?? expected;
  const chargeHoursFrom = settings.chargeHours !== undefined ? ('planned' as const) : expected !== null ? ('past-charges' as const) : null;
  const horizonOil = nowOil === null ? null : chargeHours !== null ? Math.max(chargeHours, nowOil) : nowOil + config.horizonHours;
  const hoursPerDay = track === undefined ? null : hoursPerDayOf(track.usage);
  const lastTime = state.last?.time ?? 0;
  // The present charge has run longer than every past charge remembered: no oil change is assumed, and the words say so.
  const outlasted = settings.chargeHours === undefined && past > 0 && expected === null && nowOil !== null ? { oilHours: nowOil, longest: past, charges: track!.pastCharges!.length } : undefined;
  const ctx: WordingContext = {
    chargeHours,
    planned: chargeHoursFrom === 'planned',
    horizonHours: config.horizonHours,
    residualFraction: settings.residualFraction,
    ...(outlasted !== undefined && { outlasted }),
  };
  const measurands = options.measurands ?? candidates(state, settings);
  const out: MeasurandForecast[] = [];
  for (const m of measurands) {
    const specs = limitSpecs(m, settings, group);
    if (specs.length === 0) continue;
    const found = nowOil === null || horizonOil === null ? { ok: false as const, reason: 'the latest sample gives no oil hours' } : basisOf(m, state, settings, group, config);
    const b: Basis = found.ok && found.gate !== undefined && options.gates !== false ? { ok: false, reason: found.gate } : found;
    if (!b.ok) {
      out.push({ measurand: m, status: 'not-enough-history', reason: b.reason, projection: [], limits: specs.map((s) => unforecast(m, s, b.reason, ctx)) });
      continue;
    }
    const q = quantileFunction(b.df);
    const p = { low: config.interval.lower / 100, high: config.interval.upper / 100 };
    const t0 = b.basis.oilHours;
    const horizon = Math.max(0, horizonOil! - t0);
    const drifting = (t: ProjectedTrend): ProjectedTrend => (b.rateDrift > 0 ? { ...t, rateDrift: b.rateDrift } : t);
    const trend = drifting(b.trend);
    // A wear metal with recent intervals: the filter's trend and the recent trend, weighed by how well each accounts for them.
    const mix: TrendMixture | undefined =
      b.recent === undefined
        ? undefined
        : [
            { weight: 1 - b.recent.weight, trend },
            { weight: b.recent.weight, trend: drifting(b.recent.trend) },
          ];
    const basis: ForecastBasis = b.recent === undefined ? b.basis : { ...b.basis, recent: recentBasis(b.recent) };
    const time = (tau: number): ForecastTime => timeOf(t0 + tau, nowOil!, hoursPerDay, lastTime);
    const limits = specs.map((spec) => {
      const levelAt = (tau: number) => spec.levelAt(t0 + tau);
      const mixed = mix === undefined ? undefined : mixtureCrossing(mix, { levelAt, side: spec.side, horizon });
      const query = (pq: number, h = horizon, from = 0) =>
        mixed === undefined ? crossingQuantile(trend, { levelAt, side: spec.side, horizon: h, z: q(pq), from }) : mixed.quantile(pq, from, h);
      const central = query(0.5);
      const levelNow = spec.levelAt(nowOil!) ?? spec.levelAt(t0) ?? 0;
      let parts: Omit<LimitForecast, 'text'>;
      if (central === undefined) {
        const accumulates = MEASURANDS[m].kind === 'wear' || MEASURANDS[m].kind === 'contaminant';
        let nextCharge: LimitForecast['nextCharge'];
        if (accumulates && chargeHours !== null) {
          // The next charge is projected from the filter's trend alone: a rate change seen in the recent intervals
          // is not carried over a drain into a whole further charge.
          const atDrain = trendAt(trend, horizon);
          const r = settings.residualFraction;
          const start: ProjectedTrend = { ...atDrain, level: r * atDrain.level, levelVariance: r * r * atDrain.levelVariance, covariance: r * atDrain.covariance, dilution: 0 };
          const next = crossingQuantile(start, { levelAt: (tau) => spec.levelAt(tau), side: spec.side, horizon: chargeHours, z: 0 });
          nextCharge = { oilHours: next ?? null };
        }
        const early = query(p.low);
        parts = { ...head(m, spec, levelNow), outcome: 'after-oil-change', ...(early !== undefined && { early: time(early) }), ...(nextCharge && { nextCharge }) };
      } else if (t0 + central <= nowOil!) {
        parts = { ...head(m, spec, spec.levelAt(t0 + central) ?? levelNow), outcome: 'already' };
      } else {
        // Quantiles are ordered: the early one lies before the central, the late one after it.
        const early = query(p.low, central);
        const late = query(p.high, horizon, central);
        parts = {
          ...head(m, spec, spec.levelAt(t0 + central) ?? levelNow),
          outcome: 'crossing',
          central: time(central),
          ...(early !== undefined && { early: time(early) }),
          ...(late !== undefined && { late: time(late) }),
        };
      }
      const estimate = parts.outcome === 'already' ? projectAt(trend, Math.max(0, nowOil! - t0)).mean : undefined;
      return { ...parts, text: forecastText(m, spec, parts, ctx, estimate) } satisfies LimitForecast;
    });
    const points = (options.projection === false ? [] : projection(mix ?? [{ weight: 1, trend }], t0, horizon, p, q)).map((p) => {
      const at = timeOf(p.oilHours, nowOil!, hoursPerDay, lastTime).date;
      return at === undefined ? p : { ...p, at: atTime(p.oilHours, nowOil!, hoursPerDay!, lastTime) };
    });
    out.push({ measurand: m, status: 'forecast', ...(b.gate !== undefined && { gatedBy: b.gate }), basis, projection: points, limits });
  }
  return {
    sampleId: state.last?.sampleId ?? '',
    sampledAt: state.last === undefined ? '' : new Date(state.last.time).toISOString(),
    oilHours: nowOil,
    hoursPerDay,
    chargeHours,
    chargeHoursFrom,
    horizonOilHours: horizonOil,
    percentiles: [config.interval.lower, config.interval.upper],
    measurands: out,
    caution: `${FORECAST_CAUTION} ${ADVISORY_CAUTION}`,
  };
}

function head(m: Measurand, spec: LimitSpec, level: number): Pick<LimitForecast, 'measurand' | 'source' | 'severity' | 'side' | 'level'> {
  return { measurand: m, source: spec.source, severity: spec.severity, side: spec.side, level };
}

function unforecast(m: Measurand, spec: LimitSpec, reason: string, ctx: WordingContext): LimitForecast {
  const parts = { ...head(m, spec, spec.levelAt(0) ?? 0), outcome: 'not-enough-history' as const, reason };
  return { ...parts, text: forecastText(m, spec, parts, ctx) };
}

/** Measurands read on the present charge that have a trend to follow: the filter's metals and the fitted ones. */
function candidates(state: AnalysisState, settings: ComponentSettings): Measurand[] {
  const out = new Set<Measurand>();
  for (const m of settings.detection.measurands) if (state.wear[m]?.previous !== undefined) out.add(m);
  for (const m of Object.keys(state.forecast?.trend ?? {}) as Measurand[]) out.add(m);
  return [...out];
}

function basisOf(m: Measurand, state: AnalysisState, settings: ComponentSettings, group: GroupStats | undefined, config: ForecastConfig): Basis {
  const base = settings.detection.measurands.includes(m) && MEASURANDS[m].kind === 'wear' ? filterBasis(m, state, settings, group, config) : trendBasis(m, state, config);
  if (!base.ok) return base;
  const nowOil = state.charge?.lastOilHours ?? 0;
  const topUp = state.forecast?.topUp ?? 0;
  const level = makeUpLevel(m, settings);
  const dilution = level !== undefined && nowOil > 0 ? topUp / nowOil : 0;
  const diluted = (t: ProjectedTrend): ProjectedTrend => ({ ...t, dilution, makeUpLevel: level ?? 0 });
  return { ...base, trend: diluted(base.trend), ...(base.recent && { recent: { ...base.recent, trend: diluted(base.recent.trend) } }) };
}

function filterBasis(m: Measurand, state: AnalysisState, settings: ComponentSettings, group: GroupStats | undefined, config: ForecastConfig): Basis {
  const wear = state.wear[m];
  const change = state.change[m];
  const last = wear?.previous;
  const counts = state.forecast?.filter[m];
  if (last === undefined) return { ok: false, reason: 'no reading on this charge yet' };
  if (last.oilHours === undefined) return { ok: false, reason: 'the latest reading gives no oil hours' };
  const own = change?.own;
  const baseline: RateBaseline | undefined =
    own?.completedAt !== undefined ? ownRateBaseline(own.sums, settings.detection.budget.sampleIntervalHours) : trustedGroupBaseline(group, m);
  if (baseline === undefined) return { ok: false, reason: 'no wear-rate baseline yet, own or group' };
  const f = change?.filter;
  if (f === undefined || change?.previousTo !== last.sampleId) return { ok: false, reason: 'the latest interval was not judged (running-in or censored)' };
  const updates = counts?.updates ?? 0;
  const censored = counts?.censored ?? 0;
  const gate = last.censored
    ? CENSORED_LATEST
    : 3 * censored > updates + censored
      ? TOO_MANY_CENSORED
      : updates < config.minIntervals
        ? `fewer than ${config.minIntervals} judged wear intervals on this charge`
        : undefined;
  const since = change.signalSince !== undefined ? counts?.since : undefined;
  const q = own?.completedAt !== undefined ? projectedProcessVariance(own.sums, settings.detection.budget.sampleIntervalHours) : baseline.processVariance;
  const rate = since !== undefined && since.hours > 0 ? since.increment / since.hours : f.rate;
  const rateVariance = since !== undefined && since.hours > 0 ? (since.labVariance + q * since.hours) / since.hours ** 2 : f.rateVariance;
  const covariance = since !== undefined ? 0 : f.covariance;
  const recent = recentTrend(counts?.recent ?? [], last, rate, q, settings);
  return {
    ok: true,
    basis: {
      method: since !== undefined ? 'filter-since-signal' : 'filter',
      sampleId: last.sampleId,
      sampledAt: last.sampledAt,
      oilHours: last.oilHours,
      level: f.level,
      rate,
      levelSd: Math.sqrt(Math.max(0, f.variance)),
      rateSd: Math.sqrt(Math.max(0, rateVariance)),
    },
    trend: { level: f.level, rate, levelVariance: f.variance, covariance, rateVariance, processVariance: q, dilution: 0, makeUpLevel: 0 },
    rateDrift: baseline.rateDrift ?? 0,
    ...(gate !== undefined && { gate }),
    ...(recent && { recent }),
  };
}

/**
 * The wear-process variance per hour the projection carries, from the component's own baseline: the method of
 * moments of baseline.ts without the floor that keeps the detectors from trusting their extrapolation more than one
 * fresh reading (a detector's concern that would widen every forecast interval), with the other floor kept (one
 * tenth of a typical interval's wear as a standard deviation) so that a noisy small estimate does not shrink it to
 * nothing. A group baseline's process variance (first charge) stays as the group gives it.
 */
function projectedProcessVariance(s: BaselineSums, typicalIntervalHours: number): number {
  const rate = s.sumIncrement / s.sumHours;
  const rss = s.sumIncrementSq - 2 * rate * s.sumIncrementHours + rate * rate * s.sumHoursSq;
  return Math.max((rss - s.sumLabVariance) / s.sumHours, (PROCESS_SPREAD_FLOOR * rate) ** 2 * typicalIntervalHours, 1e-9);
}

/**
 * The wear of the recent intervals carried on from the latest reading: a weighted least-squares fit of the
 * intervals' increments to a rate that changes steadily, increment_i = h_i·(g + c·s_i) with s_i the middle of
 * interval i in operating hours before the latest reading and Var increment_i = its lab variance + q·h_i. g is the
 * rate now and c its change per hour, with their covariance from the fit; fewer than RECENT_MIN intervals fit a
 * constant rate only (c = 0).
 *
 * Its weight beside the filter's trend is the posterior probability of the fit against the filter's rate on the
 * same intervals, with equal prior odds and Schwarz's approximation: log odds = (RSS at the filter's rate − RSS of
 * the fit)/2 − (k/2)·ln n, k the fit's parameters (1 or 2) and n the intervals, RSS in units of each increment's
 * variance. On steady wear the fit's extra freedom buys little and its weight stays small; where the recent
 * intervals tell of a different or changing rate, it takes over. (Consecutive increments share a reading and the
 * filter's rate is partly learnt from the same intervals: the weight is an approximation, not an exact posterior.)
 */
function recentTrend(
  window: readonly RecentInterval[],
  last: { readonly level: number },
  filterRate: number,
  q: number,
  settings: ComponentSettings,
): { trend: ProjectedTrend; hours: number; intervals: number; weight: number } | undefined {
  const hours = window.reduce((a, w) => a + w.hours, 0);
  if (window.length < 2 || !(hours > 0)) return undefined;
  let after = 0;
  let shh = 0;
  let shs = 0;
  let sss = 0;
  let shy = 0;
  let ssy = 0;
  let syy = 0;
  for (let i = window.length - 1; i >= 0; i--) {
    const w = window[i]!;
    const s = -(after + w.hours / 2);
    after += w.hours;
    const v = w.labVariance + q * w.hours;
    shh += (w.hours * w.hours) / v;
    shs += (w.hours * w.hours * s) / v;
    sss += (w.hours * w.hours * s * s) / v;
    shy += (w.hours * w.increment) / v;
    ssy += (w.hours * s * w.increment) / v;
    syy += (w.increment * w.increment) / v;
  }
  const n = window.length;
  const atFilterRate = syy - 2 * filterRate * shy + filterRate * filterRate * shh;
  const weight = (rss: number, k: number) => 1 / (1 + Math.exp(-((atFilterRate - rss) / 2 - (k / 2) * Math.log(n))));
  const base = { level: last.level, levelVariance: labVariance(settings.detection.labNoise, last.level), covariance: 0, processVariance: q, dilution: 0, makeUpLevel: 0 };
  const det = shh * sss - shs * shs;
  if (n < RECENT_MIN || !(det > 1e-12 * shh * sss)) {
    const g = shy / shh;
    return { hours, intervals: n, weight: weight(syy - g * shy, 1), trend: { ...base, rate: g, rateVariance: 1 / shh } };
  }
  const g = (sss * shy - shs * ssy) / det;
  const c = (shh * ssy - shs * shy) / det;
  return {
    hours,
    intervals: n,
    weight: weight(syy - g * shy - c * ssy, 2),
    trend: { ...base, rate: g, rateVariance: sss / det, acceleration: { value: c, variance: shh / det, rateCovariance: -shs / det } },
  };
}

function trendBasis(m: Measurand, state: AnalysisState, config: ForecastConfig): Basis {
  const t = state.forecast?.trend[m];
  const last = t?.last;
  if (t === undefined || last === undefined) return { ok: false, reason: 'no reading on this charge yet' };
  if (last.oilHours === undefined) return { ok: false, reason: 'the latest reading gives no oil hours' };
  const { n, st, stt, sy, sty, syy } = t.sums;
  if (n < 3) return { ok: false, reason: `fewer than ${config.minReadings} readings on this charge` };
  const gate = last.censored
    ? CENSORED_LATEST
    : 3 * t.censored > t.readings
      ? TOO_MANY_CENSORED
      : n < config.minReadings
        ? `fewer than ${config.minReadings} readings on this charge`
        : undefined;
  const tBar = st / n;
  const yBar = sy / n;
  const sxx = stt - n * tBar * tBar;
  if (!(sxx > 1e-9 * Math.max(1, stt))) return { ok: false, reason: 'the readings of this charge share one oil-hours point' };
  const sxy = sty - n * tBar * yBar;
  const syyc = syy - n * yBar * yBar;
  const slope = sxy / sxx;
  const s2 = Math.max(0, (syyc - slope * sxy) / (n - 2));
  const d = last.oilHours - tBar;
  const level = yBar + slope * d;
  const levelVariance = s2 * (1 / n + (d * d) / sxx);
  const rateVariance = s2 / sxx;
  return {
    ok: true,
    basis: { method: 'trend', sampleId: last.sampleId, sampledAt: last.sampledAt, oilHours: last.oilHours, level, rate: slope, levelSd: Math.sqrt(levelVariance), rateSd: Math.sqrt(rateVariance) },
    trend: { level, rate: slope, levelVariance, covariance: s2 * (d / sxx), rateVariance, processVariance: 0, dilution: 0, makeUpLevel: 0 },
    rateDrift: 0,
    df: n - 2,
    ...(gate !== undefined && { gate }),
  };
}

function projection(mix: TrendMixture, t0: number, horizon: number, p: { low: number; high: number }, q: (p: number) => number): ProjectionPoint[] {
  if (!(horizon > 0)) return [];
  const out: ProjectionPoint[] = [];
  const single = mix.length === 1 ? mix[0]!.trend : undefined;
  const ps = [0.5, p.low, p.high];
  let previous: number[] | undefined;
  for (let i = 0; i <= PROJECTION_POINTS; i++) {
    const tau = (horizon * i) / PROJECTION_POINTS;
    if (single !== undefined) {
      const x = projectAt(single, tau);
      out.push({ oilHours: t0 + tau, central: x.mean, low: x.mean + q(p.low) * x.sd, high: x.mean + q(p.high) * x.sd });
    } else {
      // Each point's quantiles start from the previous point's: Newton's method then needs a step or two.
      const [central, low, high] = (previous = mixtureLevelQuantiles(mix, tau, ps, previous)) as [number, number, number];
      out.push({ oilHours: t0 + tau, central, low, high });
    }
  }
  return out;
}

function recentBasis(r: { readonly trend: ProjectedTrend; readonly hours: number; readonly intervals: number; readonly weight: number }): NonNullable<ForecastBasis['recent']> {
  const c = r.trend.acceleration;
  return {
    weight: r.weight,
    intervals: r.intervals,
    hours: r.hours,
    level: r.trend.level,
    rate: r.trend.rate,
    levelSd: Math.sqrt(r.trend.levelVariance),
    rateSd: Math.sqrt(r.trend.rateVariance),
    ...(c !== undefined && { rateChange: c.value, rateChangeSd: Math.sqrt(c.variance) }),
  };
}

/** The time at which the component reaches `oilHours` (from the latest sample's time, at its recent hours per day). */
function atTime(oilHours: number, nowOil: number, hoursPerDay: number, lastTime: number): string {
  return new Date(lastTime + (Math.max(0, oilHours - nowOil) / hoursPerDay) * DAY_MS).toISOString();
}

function timeOf(oilHours: number, nowOil: number, hoursPerDay: number | null, lastTime: number): ForecastTime {
  const hoursFromNow = Math.max(0, oilHours - nowOil);
  const date = hoursPerDay === null ? undefined : new Date(lastTime + (hoursFromNow / hoursPerDay) * DAY_MS).toISOString().slice(0, 10);
  return { oilHours, hoursFromNow, ...(date !== undefined && { date }) };
}

/** Operating hours per calendar day over the recent unit-hours readings; null with less than a day between them or no running. */
export function hoursPerDayOf(usage: readonly UsagePoint[]): number | null {
  const first = usage[0];
  const last = usage.at(-1);
  if (first === undefined || last === undefined) return null;
  const days = (last.time - first.time) / DAY_MS;
  const hours = last.unitHours - first.unitHours;
  if (!(days >= 1) || !(hours > 0)) return null;
  return Math.min(24, hours / days);
}

export type { ForecastTrack };
