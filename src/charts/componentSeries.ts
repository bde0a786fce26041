/**
 * The series behind a component's trend charts and the body of `GET /v1/units/:unit/components/:component/series`:
 * per measurand, the readings per oil charge, the wear rate per interval, the change detectors' statistics against
 * their limits, the fixed and population limits, and a mark wherever a rule fired. Pure: built from an evaluation
 * and the settings and group statistics it ran with, so the chart shows exactly what the worker judged.
 */
import { ADVISORY_CAUTION } from '../domain/caution.ts';
import type { Levels } from '../domain/config.ts';
import type { Finding, RuleFamily, Severity } from '../domain/finding.ts';
import { MEASURAND_NAMES, MEASURANDS, type Measurand } from '../domain/measurands.ts';
import { formatReading, type Iso4406Code } from '../domain/reading.ts';
import type { ComponentSettings } from '../domain/settings.ts';
import type { FullEvaluation } from '../analysis/evaluate.ts';
import type { FoldStep } from '../analysis/fold/analysisFold.ts';
import { sampleIso4406Code, targetIso4406Code } from '../analysis/iso4406.ts';
import type { Charge, Evaluation, GroupStats, Interval } from '../analysis/model.ts';
import { populationMeasurands } from '../analysis/populationStats.ts';
import { populationLimitStatus, type PopulationLimitStatus } from '../analysis/rules/population.ts';
import type { RuleInput } from '../analysis/rules/ruleInput.ts';
import { detectorTraces, type CusumTrace, type EwmaTrace } from './detectorTraces.ts';
import { forecastComponent } from '../analysis/forecast/forecastComponent.ts';
import { conditionSpecs } from '../analysis/forecast/limits.ts';
import type { ComponentForecast, MeasurandForecast } from '../analysis/forecast/model.ts';

export interface ComponentSeries {
  readonly unit: string;
  readonly component: string;
  readonly group: string;
  readonly samples: number;
  readonly charges: number;
  /**
   * The time-to-limit forecasts' common ground (latest sample, hours per day, planned charge length, percentiles,
   * caution); each measurand's own forecast is in its series. Null when forecasts are disabled.
   */
  readonly forecast: Omit<ComponentForecast, 'measurands'> | null;
  readonly measurands: readonly MeasurandSeries[];
  /**
   * The caution that goes with the marks' findings wherever they reach a person or another system (ADVISORY_CAUTION):
   * always present, whether forecasts are enabled or not, and drawn on every chart.
   */
  readonly advisory: typeof ADVISORY_CAUTION;
}

export interface MeasurandSeries {
  readonly measurand: Measurand;
  /** From the measurand catalogue: "iron", "base number (TBN)". */
  readonly label: string;
  /** Unit of measure of the readings: "ppm", "mg KOH/g". */
  readonly unit: string;
  readonly charges: readonly ChargeReadings[];
  /** The fixed caution/alarm levels configured for the group; null when none are set. */
  readonly limits: Levels | null;
  /**
   * The oil-condition levels the condition rule judges the readings by (rules/condition.ts): water, fuel, soot,
   * oxidation and nitration above their levels, TAN above new oil plus its rise, TBN below its share of new oil,
   * viscosity either way from new. Empty for other measurands, and without the new-oil value a level needs.
   */
  readonly conditionLevels: readonly ConditionLevel[];
  /** Population limits at each reading; null when the population rule does not judge this measurand. */
  readonly population: readonly PopulationPoint[] | null;
  /** Wear metals only. */
  readonly rates: RateSeries | null;
  /** ISO 4406 codes only: the scale number of each size range at every sample, and the group's target code. */
  readonly cleanliness: CleanlinessSeries | null;
  /** Detection measurands only, when the detector is enabled. */
  readonly cusum: CusumTrace | null;
  readonly ewma: EwmaTrace | null;
  /** One mark per finding of this measurand, in time order. */
  readonly marks: readonly RuleMark[];
  /**
   * When the reading is expected to cross each of its levels at the present trend, with the projection drawn dashed
   * with its band on the chart; null when the measurand has no level to forecast or forecasts are disabled.
   */
  readonly forecast: MeasurandForecast | null;
}

export interface ConditionLevel {
  readonly severity: 'caution' | 'alarm';
  /** Which way a reading crosses it: up through it, or down through it (TBN, viscosity below new). */
  readonly side: 'above' | 'below';
  readonly level: number;
  /** Where the level comes from: "oil-condition level", "half of the new-oil 10 mg KOH/g". */
  readonly note: string;
}

/** The readings of one oil charge; wear-metal series restart at every new charge. */
export interface ChargeReadings {
  readonly index: number;
  readonly startedBy: Charge['startedBy'];
  readonly points: readonly ReadingPoint[];
}

export interface ReadingPoint {
  readonly sampleId: string;
  readonly sampledAt: string;
  readonly oilHours: number | null;
  /** The reading; for a censored reading, its bound. */
  readonly value: number;
  /** Below or above the lab's reporting range: `value` is a bound, not a measurement. */
  readonly censored: boolean;
  /** The reading as the lab gave it: "12", "<1". */
  readonly text: string;
}

export interface PopulationPoint {
  readonly sampleId: string;
  readonly sampledAt: string;
  readonly oilHours: number | null;
  /** The band's limits, or "not enough data" with how many results the band has and needs. */
  readonly status: PopulationLimitStatus;
}

export interface RateSeries {
  /** Rate-of-change levels in ppm per 100 h configured for the group; null when none are set. */
  readonly limits: Levels | null;
  readonly points: readonly RatePoint[];
}

export interface RatePoint {
  /** The sample that ends the interval. */
  readonly sampleId: string;
  readonly sampledAt: string;
  readonly chargeIndex: number;
  readonly hours: number;
  /** Wear metal gained per 100 operating hours on the charge (ppm/100 h). */
  readonly per100h: number;
  readonly firstOfCharge: boolean;
  /** Either end is censored: the rate is a bound only. */
  readonly censored: boolean;
  /** New or overhauled component: fast wear is expected and not judged. */
  readonly runningIn: boolean;
}

export interface CleanlinessSeries {
  readonly target: Iso4406Code | null;
  readonly points: readonly CodePoint[];
}

export interface CodePoint {
  readonly sampleId: string;
  readonly sampledAt: string;
  readonly oilHours: number | null;
  readonly code: Iso4406Code;
  /** "18/16/13". */
  readonly text: string;
  /** Worked out from the particle counts per mL, the lab having given no code. */
  readonly fromCounts: boolean;
}

/** Which chart panel a rule's verdict belongs on. */
export type MarkPanel = 'readings' | 'rate' | 'cusum' | 'ewma';

export interface RuleMark {
  readonly sampleId: string;
  readonly sampledAt: string;
  readonly rule: RuleFamily;
  readonly severity: Severity;
  readonly direction?: 'up' | 'down';
  readonly value: number;
  readonly threshold?: number;
  readonly panel: MarkPanel;
  readonly explanation: string;
}

export interface ComponentSeriesOptions {
  /** Only these measurands, in this order. Default: every measurand with a reading, detection measurands first. */
  readonly measurands?: readonly Measurand[];
}

export function buildComponentSeries(
  evaluation: FullEvaluation,
  settings: ComponentSettings,
  group?: GroupStats,
  options: ComponentSeriesOptions = {},
): ComponentSeries {
  const { history } = evaluation;
  const intervals = new Map<Measurand, Interval[]>();
  for (const step of evaluation.steps) {
    for (const iv of step.detail.intervals) {
      const list = intervals.get(iv.measurand);
      if (list === undefined) intervals.set(iv.measurand, [iv]);
      else list.push(iv);
    }
  }
  const input: RuleInput = { history, settings, intervals: (m) => intervals.get(m) ?? [], ...(group !== undefined && { group }) };
  const findings = evaluation.steps.flatMap((s) => s.findings);
  const measurands = options.measurands ?? plottedMeasurands(evaluation, settings);
  const forecast = settings.forecast?.enabled === false || history.samples.length === 0 ? undefined : forecastComponent(evaluation.state, settings, group, { measurands });
  const { measurands: perMeasurand, ...common } = forecast ?? { measurands: [] };
  return {
    unit: history.unit,
    component: history.component,
    group: settings.group,
    samples: history.samples.length,
    charges: history.charges.length,
    forecast: forecast === undefined ? null : (common as Omit<ComponentForecast, 'measurands'>),
    measurands: measurands.map((m) => ({
      ...measurandSeries(input, evaluation.steps, m, findings.filter((f) => f.measurand === m)),
      forecast: perMeasurand.find((f) => f.measurand === m) ?? null,
    })),
    advisory: ADVISORY_CAUTION,
  };
}

function measurandSeries(input: RuleInput, steps: readonly FoldStep[], m: Measurand, findings: readonly Finding[]): Omit<MeasurandSeries, 'forecast'> {
  const { history, settings } = input;
  const info = MEASURANDS[m];
  const charges = history.charges.map((c) => ({
    index: c.index,
    startedBy: c.startedBy,
    points: c.samples.flatMap((s) => {
      const r = s.readings[m];
      if (r === undefined || r.kind === 'code') return [];
      return [
        {
          sampleId: s.sampleId,
          sampledAt: s.sampledAt,
          oilHours: s.oilHours ?? null,
          value: r.kind === 'value' ? r.value : r.limit,
          censored: r.kind === 'censored',
          text: formatReading(r),
        },
      ];
    }),
  }));
  const population = populationMeasurands(settings.population).includes(m)
    ? history.samples
        .filter((s) => s.readings[m] !== undefined)
        .map((s) => ({ sampleId: s.sampleId, sampledAt: s.sampledAt, oilHours: s.oilHours ?? null, status: populationLimitStatus(input, m, s) }))
    : null;
  const rates: RateSeries | null =
    info.kind === 'wear'
      ? {
          limits: settings.rateLimits[m] ?? null,
          points: input.intervals(m).map((iv) => ({
            sampleId: iv.to.sampleId,
            sampledAt: iv.to.sampledAt,
            chargeIndex: iv.chargeIndex,
            hours: iv.hours,
            per100h: iv.rate * 100,
            firstOfCharge: iv.firstOfCharge,
            censored: iv.censored,
            runningIn: iv.runningIn,
          })),
        }
      : null;
  const cleanliness: CleanlinessSeries | null =
    m === 'iso4406'
      ? {
          target: targetIso4406Code(settings.cleanlinessTarget) ?? null,
          points: history.samples.flatMap((s) => {
            const code = sampleIso4406Code(s);
            return code === undefined
              ? []
              : [{ sampleId: s.sampleId, sampledAt: s.sampledAt, oilHours: s.oilHours ?? null, ...code, text: formatReading({ kind: 'code', code: code.code }) }];
          }),
        }
      : null;
  const traces = settings.detection.measurands.includes(m) ? detectorTraces(steps, settings, m) : { cusum: null, ewma: null };
  return {
    measurand: m,
    label: info.label,
    unit: info.unit,
    charges,
    limits: settings.limits[m] ?? null,
    conditionLevels: conditionSpecs(m, settings)
      // Ten significant digits: 14 × 1.1 reads 15.4, as the rule's sentence says it, not 15.400000000000002.
      .map((c) => ({ severity: c.severity, side: c.side, level: Number(c.levelAt(0)!.toPrecision(10)), note: c.note }))
      .sort((a, b) => (a.side === b.side ? (a.severity === 'caution' ? -1 : 1) : a.side === 'above' ? -1 : 1)),
    population,
    rates,
    cleanliness,
    cusum: traces.cusum,
    ewma: traces.ewma,
    marks: findings.map((f) => ({
      sampleId: f.sampleId,
      sampledAt: f.sampledAt,
      rule: f.rule,
      severity: f.severity,
      ...(f.direction !== undefined && { direction: f.direction }),
      value: f.value,
      ...(f.threshold !== undefined && { threshold: f.threshold }),
      panel: panelOf(f),
      explanation: f.explanation,
    })),
  };
}

/** The panel of the statistic the rule judged: a sampling finding on a detector's fall sits on that detector's panel. */
function panelOf(f: Finding): MarkPanel {
  const rule: RuleFamily = f.rule === 'sampling' && (f.basis === 'cusum' || f.basis === 'ewma') ? f.basis : f.rule;
  switch (rule) {
    case 'rate':
      return 'rate';
    case 'cusum':
      return 'cusum';
    case 'ewma':
      return 'ewma';
    default:
      return 'readings';
  }
}

/** Detection measurands first (the ones the engineer configured to watch), then the catalogue order. */
function plottedMeasurands(evaluation: Evaluation, settings: ComponentSettings): Measurand[] {
  const present = new Set<Measurand>();
  for (const s of evaluation.history.samples) {
    for (const m of MEASURAND_NAMES) {
      if (s.readings[m] !== undefined) present.add(m);
    }
  }
  if (evaluation.history.samples.some((s) => sampleIso4406Code(s) !== undefined)) present.add('iso4406');
  const first = settings.detection.measurands.filter((m) => present.has(m));
  return [...first, ...MEASURAND_NAMES.filter((m) => present.has(m) && !first.includes(m))];
}
