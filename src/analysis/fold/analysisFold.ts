/**
 * The analysis of one component as a fold over its samples in order: each sample moves a compact state (the
 * charge, each metal's interval track, each detection measurand's filter, baseline and detectors) and yields the
 * findings of every rule family at that sample. The state is plain JSON: a worker keeps it as a checkpoint, so a
 * result that arrives in order costs the same whatever the length of the history, and a late one rewinds to a
 * checkpoint before it and folds forward. Folding a whole history from the empty state is the full evaluation;
 * both give the same steps.
 */
import type { Sample } from '../../domain/event.ts';
import { findingKey, type Finding } from '../../domain/finding.ts';
import { MEASURANDS, type Measurand } from '../../domain/measurands.ts';
import type { ComponentSettings } from '../../domain/settings.ts';
import { changeDesign } from '../budget.ts';
import type { BaselineSums, GroupStats, Interval, RateBaseline, SampleMark, SampleStatus, Step } from '../model.ts';
import { changeVerdicts } from '../rules/change.ts';
import { cleanlinessVerdicts } from '../rules/cleanliness.ts';
import { conditionVerdicts } from '../rules/condition.ts';
import { limitVerdicts } from '../rules/limit.ts';
import { populationVerdicts } from '../rules/population.ts';
import { peerVerdict } from '../rules/peers.ts';
import { rateVerdicts } from '../rules/rate.ts';
import { advanceSampling, EMPTY_SAMPLING_TRACK, samplingChecks, type SamplingTrack } from '../rules/sampling.ts';
import type { SampleInput } from '../rules/ruleInput.ts';
import { advanceCharge, chargeStart, type ChargeTrack } from './chargeTrack.ts';
import { advanceChange, emptyChangeTrack, restartChange, type ChangePoint, type ChangeTrack, type DetectorLimits } from './changeTrack.ts';
import { advanceWear, EMPTY_WEAR_TRACK, rollOverCharge, type WearTrack } from './wearTrack.ts';
import { DEFAULT_FORECAST } from '../../domain/forecastConfig.ts';
import { advanceForecast, type ForecastTrack } from '../forecast/forecastTrack.ts';
import { forecastMeasurands } from '../forecast/limits.ts';
import { forecastComponent, type ForecastOptions } from '../forecast/forecastComponent.ts';
import type { ComponentForecast } from '../forecast/model.ts';

/** Where a sample sorts in a history: by sampling time, then unit hours (missing last), then sampleId. */
export interface OrderKey {
  readonly sampleId: string;
  readonly time: number;
  readonly unitHours?: number;
}

export interface AnalysisState {
  readonly unit: string;
  readonly component: string;
  /** Samples folded in. */
  readonly samples: number;
  readonly last?: OrderKey;
  readonly charge?: ChargeTrack;
  readonly wear: Readonly<Partial<Record<Measurand, WearTrack>>>;
  readonly change: Readonly<Partial<Record<Measurand, ChangeTrack>>>;
  readonly sampling: SamplingTrack;
  /** What the time-to-limit forecast needs beyond the tracks above (forecast/forecastTrack.ts); absent when disabled. */
  readonly forecast?: ForecastTrack;
}

/** What the analysis saw at one sample besides its findings: the intervals ending there and the detectors' statistics. */
export interface StepDetail {
  readonly intervals: readonly Interval[];
  readonly change: readonly ChangePoint[];
}

export interface FoldStep extends Step {
  readonly detail: StepDetail;
}

export function emptyAnalysisState(unit: string, component: string): AnalysisState {
  return { unit, component, samples: 0, wear: {}, change: {}, sampling: EMPTY_SAMPLING_TRACK };
}

/** A group baseline is trusted once it pools at least this many components' complete baselines. */
export const MIN_GROUP_COMPONENTS = 2;

export function trustedGroupBaseline(group: GroupStats | undefined, m: Measurand): RateBaseline | undefined {
  const b = group?.baselines[m];
  return b !== undefined && b.components >= MIN_GROUP_COMPONENTS ? b : undefined;
}

export interface AnalysisFoldOptions {
  /** Hold the learnt rate while an upward change is signalled. Default true. */
  readonly holdRateWhileSignalling?: boolean;
  /**
   * The state is handed over: the fold works on it in place instead of on a copy, and the caller does not use it
   * again (a checkpoint just decoded). Default false.
   */
  readonly adoptState?: boolean;
}

export class AnalysisFold {
  private s: {
    unit: string;
    component: string;
    samples: number;
    last?: OrderKey;
    charge?: ChargeTrack;
    wear: Partial<Record<Measurand, WearTrack>>;
    change: Partial<Record<Measurand, ChangeTrack>>;
    sampling: SamplingTrack;
    forecast?: ForecastTrack;
  };
  private readonly limits: DetectorLimits;
  /** Measurands the forecast fits a straight line to (those with a level to watch that the filter does not follow); null: no forecast. */
  private readonly trendMeasurands: readonly Measurand[] | null;
  private readonly detecting: boolean;
  private readonly hold: boolean;

  constructor(
    private readonly settings: ComponentSettings,
    state: AnalysisState,
    options: AnalysisFoldOptions = {},
  ) {
    this.s = (options.adoptState === true ? state : structuredClone(state)) as AnalysisFold['s'];
    const d = settings.detection;
    this.detecting = d.ewma.enabled || d.cusum.enabled;
    const { rise, fall } = changeDesign(d, settings.population);
    this.limits = { cusumH: rise.cusumH, ewmaL: rise.ewmaL, cusumHFall: fall?.cusumH ?? rise.cusumH, ewmaLFall: fall?.ewmaL ?? rise.ewmaL };
    this.hold = options.holdRateWhileSignalling ?? true;
    const forecast = settings.forecast ?? DEFAULT_FORECAST;
    this.trendMeasurands = forecast.enabled
      ? forecastMeasurands(settings).filter((m) => !(d.measurands.includes(m) && MEASURANDS[m].kind === 'wear'))
      : null;
  }

  /** The time-to-limit forecasts as of the samples folded so far (forecast/forecastComponent.ts); undefined when disabled. */
  forecast(group: GroupStats | undefined, options: ForecastOptions = {}): ComponentForecast | undefined {
    return this.trendMeasurands === null ? undefined : forecastComponent(this.s, this.settings, group, options);
  }

  /** A copy of the state after the samples folded so far. */
  state(): AnalysisState {
    return structuredClone(this.s);
  }

  /** The state after the samples folded so far, without a copy: the last use of the fold (it must not advance after it). */
  finalState(): AnalysisState {
    return this.s;
  }

  /** The own baseline sums of the current life per detection measurand, once complete (what the group pools). */
  baselines(): Partial<Record<Measurand, BaselineSums>> {
    const out: Partial<Record<Measurand, BaselineSums>> = {};
    if (!this.detecting) return out;
    for (const m of this.settings.detection.measurands) {
      const own = this.s.change[m]?.own;
      if (own?.completedAt !== undefined) out[m] = own.sums;
    }
    return out;
  }

  /**
   * Folds in the next sample (in history order) and returns its step.
   * @param group the group's statistics as they stood when the sample was drawn (other units only)
   * @param mark what a responder said of the sample, if anything
   */
  advance(sample: Sample, group: GroupStats | undefined, word?: SampleMark): FoldStep {
    const s = this.s;
    // The word on a usual rate says nothing of the sample's validity: the sampling checks judge it as any other.
    const mark = word === 'usual-rate' ? undefined : word;
    const base = { unit: s.unit, component: s.component, settings: this.settings, ...(group !== undefined && { group }), sample };
    const prior = s.charge;
    const checks = (track: SamplingTrack, lastOilHours: number | undefined) =>
      samplingChecks({ ...base, intervals: NO_INTERVALS }, track, {
        ...(lastOilHours !== undefined && { lastOilHours }),
        continuesCharge: prior !== undefined && chargeStart(sample, lastOilHours) === undefined,
        changeReported: sample.oilChanged || sample.componentChanged,
        carryOver: () => carryOverOf(sample, this.settings.sumpLitres),
      });
    let verdict = mark === undefined ? checks(s.sampling, prior?.lastOilHours) : { findings: [], inDoubt: false };
    // In doubt against the accepted history but not against the sample in doubt just before it: the two agree on a
    // new level, and this one is accepted (see SamplingTrack.doubted).
    const doubted = s.sampling.doubted;
    let reference = s.sampling;
    if (mark === undefined && verdict.inDoubt && doubted !== undefined) {
      const again = checks(doubted.track, doubted.oilHours ?? prior?.lastOilHours);
      if (!again.inDoubt) {
        verdict = again;
        reference = doubted.track;
      }
    }
    const status: SampleStatus = mark ?? (verdict.inDoubt ? 'in-doubt' : 'accepted');
    const included = status === 'accepted' || status === 'confirmed';
    const intervals = new Map<Measurand, Interval>();
    const points: ChangePoint[] = [];
    const peerFindings: Finding[] = [];
    let newCharge = false;
    if (included) {
      const next = advanceCharge(s.charge, sample);
      s.charge = next.track;
      newCharge = next.newCharge;
      if (newCharge) for (const m of Object.keys(s.wear) as Measurand[]) s.wear[m] = rollOverCharge(s.wear[m]!);
      for (const m of wearMeasurandsOf(sample, s.wear)) {
        const { track, interval } = advanceWear(s.wear[m] ?? EMPTY_WEAR_TRACK, sample, m, next.track, this.settings);
        s.wear[m] = track;
        if (interval !== undefined) intervals.set(m, interval);
      }
    }
    s.sampling = advanceSampling(reference, sample, included, newCharge, verdict.findings.some((f) => f.check === 'foreign-oil'));
    const input: SampleInput = { ...base, intervals };
    let restarts: Measurand[] | undefined;
    if (included && this.detecting) {
      for (const m of this.settings.detection.measurands) {
        const iv = intervals.get(m);
        const before = s.change[m] ?? emptyChangeTrack(this.settings.detection);
        let track = before;
        if (iv !== undefined) {
          const r = advanceChange(before, iv, {
            detection: this.settings.detection,
            limits: this.limits,
            group: trustedGroupBaseline(group, m),
            holdRateWhileSignalling: this.hold,
          });
          track = r.track;
          if (r.point !== undefined) points.push(r.point);
          // A responder's word that the rate signalled here as a rise is this component's usual one (SampleMark): the
          // detectors learn a new baseline after this sample, whose findings stand as judged (restarted below).
          if (word === 'usual-rate' && track.signalSince !== undefined) (restarts ??= []).push(m);
        }
        if (track.own.completedAt !== undefined) {
          const peer = peerVerdict(input, m, track.own, group?.baselines[m]?.peers, track.peerFlagged === true);
          if (peer.finding !== undefined) peerFindings.push(peer.finding);
          track = { ...track, peerFlagged: peer.flagged };
        }
        if (track !== before) s.change[m] = track;
      }
    }
    if (included && this.trendMeasurands !== null) {
      s.forecast = advanceForecast(s.forecast, {
        sample,
        chargeIndex: s.charge!.index,
        newCharge,
        settings: this.settings,
        intervals,
        points,
        change: s.change,
        trendMeasurands: this.trendMeasurands,
        usageSamples: (this.settings.forecast ?? DEFAULT_FORECAST).usageSamples,
      });
    }
    let findings: Finding[] =
      status === 'rejected'
        ? []
        : [
            ...limitVerdicts(input),
            ...rateVerdicts(input),
            ...populationVerdicts(input),
            ...conditionVerdicts(input),
            ...cleanlinessVerdicts(input),
            ...changeVerdicts(input, points, s.change),
            ...peerFindings,
          ];
    // A sample in doubt holds its findings back until confirmed, except an alarm: a reading at an alarm level is not
    // left waiting for someone to confirm the bottle; it says the sample is in doubt beside it.
    if (status === 'in-doubt') findings = findings.map(inDoubtFinding);
    findings = [...findings, ...verdict.findings].sort(byKey);
    for (const m of restarts ?? []) {
      s.change[m] = restartChange(s.change[m]!, { sampleId: sample.sampleId, sampledAt: sample.sampledAt }, { detection: this.settings.detection, limits: this.limits });
    }
    s.samples += 1;
    s.last = { sampleId: sample.sampleId, time: sample.time, ...(sample.unitHours !== undefined && { unitHours: sample.unitHours }) };
    return {
      sampleId: sample.sampleId,
      sampledAt: sample.sampledAt,
      findings,
      ...(status !== 'accepted' && { status }),
      detail: { intervals: [...intervals.values()], change: points },
    };
  }
}

const NO_INTERVALS: ReadonlyMap<Measurand, Interval> = new Map();

function carryOverOf(sample: Sample, sumpLitres: number | undefined): number {
  return sumpLitres === undefined || !(sample.topUpLitres > 0) ? 1 : 1 - Math.min(1, sample.topUpLitres / sumpLitres);
}

/** Wear metals read at this sample, and those tracked already (their make-up share moves on). */
function wearMeasurandsOf(sample: Sample, tracked: Partial<Record<Measurand, WearTrack>>): Measurand[] {
  const out = new Set(Object.keys(tracked) as Measurand[]);
  for (const m of Object.keys(sample.readings) as Measurand[]) if (MEASURANDS[m].kind === 'wear') out.add(m);
  return [...out];
}

function byKey(a: Finding, b: Finding): number {
  const ka = findingKey(a);
  const kb = findingKey(b);
  return ka < kb ? -1 : ka > kb ? 1 : 0;
}

/** Compares order keys as the history orders samples: time, then unit hours (missing last), then sampleId. */
export function compareOrder(a: OrderKey, b: OrderKey): number {
  if (a.time !== b.time) return a.time < b.time ? -1 : 1;
  const x = a.unitHours;
  const y = b.unitHours;
  if (x !== undefined && y !== undefined && x !== y) return x < y ? -1 : 1;
  if ((x === undefined) !== (y === undefined)) return x === undefined ? 1 : -1;
  return a.sampleId < b.sampleId ? -1 : a.sampleId > b.sampleId ? 1 : 0;
}

function inDoubtFinding(f: Finding): Finding {
  if (f.disposition !== 'incident') return f;
  if (f.severity !== 'alarm') return { ...f, disposition: 'held' };
  return { ...f, explanation: `${f.explanation} The sample itself is in doubt (see its sampling finding): re-sample to confirm.` };
}
