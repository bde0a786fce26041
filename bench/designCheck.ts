/**
 * Does the false-alarm budget hold? The product turns "1 false alarm per component per 5 years" into chart limits
 * (budget.ts: an in-control ARL of 175 samples for one chart) designed for independent N(0, 1) prediction errors.
 * That holds when the in-control wear rate and spread are known; in practice they are learnt from the component's
 * first stable intervals, and the estimation error shortens the run length. This part measures, on in-control series
 * of the benchmark fleet (fleet.ts), the ARL to the first false signal and the false alarms per 100 component-years
 * with the designed L and h, for known parameters and for own baselines of several lengths.
 */
import { detectionLimits } from '../src/analysis/budget.ts';
import { evaluateComponent } from '../src/analysis/evaluate.ts';
import type { GroupStats, RateBaseline } from '../src/analysis/model.ts';
import { parseConfig } from '../src/domain/configFile.ts';
import { resolveSettings, type ComponentSettings } from '../src/domain/settings.ts';
import { episodes } from './detection.ts';
import { COMPONENT, FLEET_CONFIG, FLEET_MODEL, GROUP, simulateFleet, type FleetModel } from './fleet.ts';
import type { PartResult } from './report.ts';
import { fmt, round } from './stats.ts';

export interface DesignCheckOptions {
  /** In-control components per case. Default 400. */
  components?: number;
  /** Monitored samples per component. Default 300. */
  monitoredSamples?: number;
  /** Own-baseline lengths compared (intervals). Default [12 (the default), 30, 60]. */
  baselineLengths?: readonly number[];
  seed?: number;
}

const HOURS_PER_COMPONENT_YEAR = 8760;

interface Case {
  readonly name: string;
  readonly model: FleetModel;
  readonly baselineIntervals: number;
  readonly group?: RateBaseline;
}

export function runDesignCheck(options: DesignCheckOptions = {}): PartResult {
  const o = { components: 400, monitoredSamples: 300, baselineLengths: [12, 30, 60], seed: 1, ...options };
  const started = performance.now();
  const config = parseConfig(FLEET_CONFIG, 'design check');
  const base = resolveSettings(config, { unit: 'bench', component: COMPONENT, group: GROUP });
  const limits = detectionLimits({ ...base.detection, ewma: { ...base.detection.ewma, enabled: true }, cusum: { ...base.detection.cusum, enabled: false } });
  const h = detectionLimits({ ...base.detection, cusum: { ...base.detection.cusum, enabled: true }, ewma: { ...base.detection.ewma, enabled: false } }).cusumH;
  const L = limits.ewmaL;
  const gap = config.incidents.returnAfterSamples + config.incidents.reopenWithinSamples;
  const truth: RateBaseline = { rate: FLEET_MODEL.rate, processVariance: FLEET_MODEL.processVariancePerRate * FLEET_MODEL.rate, intervals: 100_000, components: 1000 };
  const cases: Case[] = [
    // Every unit at the population rate, judged against the true rate and spread from the first interval on.
    { name: 'known parameters', model: { ...FLEET_MODEL, rateCv: 0 }, baselineIntervals: Number.MAX_SAFE_INTEGER, group: truth },
    ...o.baselineLengths.map((b) => ({ name: `own baseline of ${b} intervals`, model: FLEET_MODEL, baselineIntervals: b })),
  ];

  const results = cases.map((c, n) => {
    const learning = c.group === undefined ? c.baselineIntervals : 0;
    const monitorFrom = learning + 1;
    const settings: ComponentSettings = {
      ...base,
      population: { ...base.population, measurands: [] },
      detection: { ...base.detection, baselineIntervals: c.baselineIntervals, ewma: { enabled: true, lambda: base.detection.ewma.lambda, L }, cusum: { ...base.detection.cusum, enabled: true, h } },
    };
    const group: GroupStats = { group: GROUP, bands: {}, baselines: c.group === undefined ? {} : { Fe: c.group } };
    const fleet = simulateFleet(o.components, { fleetSeed: o.seed * 100 + 50 + n, samples: monitorFrom + o.monitoredSamples }, c.model);
    const tally = { ewma: { runs: 0, firsts: 0, alarms: 0, incidents: 0, chronic: 0 }, cusum: { runs: 0, firsts: 0, alarms: 0, incidents: 0, chronic: 0 } };
    let hours = 0;
    for (const component of fleet) {
      const steps = evaluateComponent(component.samples, settings, group).steps;
      hours += component.hours.at(-1)! - component.hours[monitorFrom - 1]!;
      for (const rule of ['ewma', 'cusum'] as const) {
        const fired = Uint8Array.from(steps, (s) => (s.findings.some((f) => f.rule === rule) ? 1 : 0));
        const t = tally[rule];
        const first = fired.indexOf(1, monitorFrom);
        t.runs += first < 0 ? fired.length - monitorFrom : first - monitorFrom + 1;
        if (first >= 0) t.firsts++;
        t.alarms += episodes(fired, monitorFrom, fired.length - 1, 1);
        t.incidents += episodes(fired, monitorFrom, fired.length - 1, gap);
        if (fired.subarray(monitorFrom).reduce((n, x) => n + x, 0) > (fired.length - monitorFrom) / 2) t.chronic++;
      }
    }
    const years = hours / HOURS_PER_COMPONENT_YEAR;
    const figures = (rule: 'ewma' | 'cusum') => {
      const t = tally[rule];
      return { arlToFirst: t.runs / t.firsts, alarmsPer100: (100 * t.alarms) / years, incidentsPer100: (100 * t.incidents) / years, chronic: t.chronic / fleet.length };
    };
    return { name: c.name, ewma: figures('ewma'), cusum: figures('cusum') };
  });

  const budgetPer100 = (100 * base.detection.budget.alarms) / base.detection.budget.years;
  const seconds = (performance.now() - started) / 1000;
  return {
    name: 'design-check',
    json: {
      seconds: round(seconds, 3),
      designArl0Samples: round(limits.arl0),
      budgetPer100ComponentYears: budgetPer100,
      ewma: { lambda: base.detection.ewma.lambda, L: round(L) },
      cusum: { k: base.detection.cusum.k, h: round(h) },
      components: o.components,
      monitoredSamples: o.monitoredSamples,
      cases: results.map((r) => ({
        case: r.name,
        ...Object.fromEntries(
          (['ewma', 'cusum'] as const).map((rule) => [
            rule,
            {
              arlToFirstSamples: round(r[rule].arlToFirst),
              alarmsPer100ComponentYears: round(r[rule].alarmsPer100),
              incidentsPer100ComponentYears: round(r[rule].incidentsPer100),
              chronicShare: round(r[rule].chronic),
            },
          ]),
        ),
      })),
    },
    table: {
      columns: ['case', 'EWMA ARL', 'CUSUM ARL', 'EWMA FA', 'CUSUM FA', 'EWMA incid.', 'CUSUM incid.', 'EWMA chronic', 'CUSUM chronic'],
      rows: results.map((r) => [
        r.name,
        fmt(r.ewma.arlToFirst),
        fmt(r.cusum.arlToFirst),
        fmt(r.ewma.alarmsPer100),
        fmt(r.cusum.alarmsPer100),
        fmt(r.ewma.incidentsPer100),
        fmt(r.cusum.incidentsPer100),
        `${fmt(100 * r.ewma.chronic)} %`,
        `${fmt(100 * r.cusum.chronic)} %`,
      ]),
    },
    notes: [
      `designed: one chart per component, ARL0 ${fmt(limits.arl0)} samples (budget ${base.detection.budget.alarms} per component per ${base.detection.budget.years} years = ${fmt(budgetPer100)} per 100 component-years): ` +
        `EWMA λ ${base.detection.ewma.lambda} L ${fmt(L)}, CUSUM k ${base.detection.cusum.k} h ${fmt(h)}, two-sided, exact EWMA limits`,
      `ARL: monitored samples to the first false signal (right-censored estimate); FA: false alarms (runs of firing samples) and incidents per 100 component-years;`,
      `  chronic: share of in-control components on which the chart fires at more than half of the monitored samples (a standing false alarm)`,
      `${o.components} in-control components × ${o.monitoredSamples} monitored samples per case; ${fmt(seconds)} s`,
    ],
  };
}
