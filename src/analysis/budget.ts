/**
 * From a false-alarm budget to the in-control run length each chart must have, and from that to the chart limits.
 *
 * The conversion (used by the built-in defaults):
 * - samples per component in the budget period = years · hoursPerYear / sampleIntervalHours;
 * - the component may raise `alarms` false alarms in that period, so its in-control ARL (in samples) is that number / alarms;
 * - a component runs `charts` charts (detection measurands × enabled detectors). Treated as independent, their
 *   false-alarm rates add, 1/ARL_component = Σ 1/ARL_chart, so each chart needs ARL0 = ARL_component · charts / share,
 *   where share is the part of the budget the side being designed gets (changeDesign: rise and fall apart).
 * The monitored statistic is a standardised one-step prediction error, N(0, 1) and independent in control, so the limits are
 * designed for exactly that input: h for the CUSUM with its configured k and headstart, L for the EWMA with exact
 * time-varying limits, which is what the detectors draw.
 */
import type { Budget, Config, Detection, Population } from '../domain/config.ts';
import { changeBudgetShare, samplesPerBudgetPeriod, sideShares } from '../domain/configBudget.ts';
import { InputError } from '../domain/errors.ts';
import { resolveSettings } from '../domain/settings.ts';
import { cusumDecisionInterval } from './arl/solveCusum.ts';
import { ewmaLimitWidth } from './arl/solveEwma.ts';

const NUMBER = String.raw`(\d+(?:\.\d+)?|\.\d+)`;
const BUDGET_TEXT = new RegExp(String.raw`^\s*${NUMBER}\s*(?:false\s+alarms?\s+)?per\s+component\s+(?:per|every|in)\s+(?:${NUMBER}\s+)?years?\s*$`, 'i');

/** Reads "1 per component per 5 years", "2 per component per year" (also "… every 2 years", "1 false alarm per component …"). */
export function parseBudget(text: string): { alarms: number; years: number } {
  const m = BUDGET_TEXT.exec(text);
  if (!m) throw new InputError(`false-alarm budget "${text}" not understood: expected e.g. "1 per component per 5 years" or "2 per component per year"`);
  const alarms = Number(m[1]);
  const years = m[2] === undefined ? 1 : Number(m[2]);
  if (!(alarms > 0)) throw new InputError(`false-alarm budget "${text}": the number of alarms must be more than 0`);
  if (!(years > 0)) throw new InputError(`false-alarm budget "${text}": the period must be more than 0 years`);
  return { alarms, years };
}

export { changeBudgetShare, samplesPerBudgetPeriod };

/** In-control ARL (in samples) each of `charts` charts of one component needs to keep within the budget. */
export function targetArl(b: Budget, charts: number): number {
  if (!(Number.isInteger(charts) && charts >= 1)) throw new RangeError(`charts per component must be a whole number ≥ 1, got ${charts}`);
  return (samplesPerBudgetPeriod(b) / b.alarms) * charts;
}

/**
 * The limits the detectors use: d.ewma.L and d.cusum.h when configured, otherwise derived from the budget. With no detector
 * enabled `charts` is 0 and the limits are designed as for a single chart, so that they stay defined.
 *
 * The budget counts incidents of every kind: an upward signal opens a wear incident, a downward one a sampling incident
 * (for whoever takes the samples), so each side is designed one-sided for its part of the budget:
 * `share` (changeDesign gives the rise side the change detectors' share less what the fall side takes, and the fall
 * side its part).
 */
export function detectionLimits(d: Detection, share = 1): { arl0: number; charts: number; ewmaL: number; cusumH: number; share: number } {
  if (!(share > 0 && share <= 1)) throw new RangeError(`budget share must be in (0, 1], got ${share}`);
  const detectors = (d.ewma.enabled ? 1 : 0) + (d.cusum.enabled ? 1 : 0);
  const charts = d.measurands.length * detectors;
  const arl0 = targetArl(d.budget, Math.max(1, charts)) / share;
  const ewmaL = d.ewma.L ?? designed(`an EWMA with λ = ${d.ewma.lambda}`, 'a larger detection.ewma.lambda, or set detection.ewma.L', () => ewmaLimitWidth({ lambda: d.ewma.lambda, arl0, sided: 'one', exactLimits: true }));
  const cusumH = d.cusum.h ?? designed(`a CUSUM with k = ${d.cusum.k}`, 'a smaller detection.cusum.k, or set detection.cusum.h', () => cusumDecisionInterval({ k: d.cusum.k, arl0, sided: 'one', headstart: d.cusum.headstart }));
  return { arl0, charts, ewmaL, cusumH, share };
}

/** A limit derived from the budget; a run length the chart cannot give is refused naming the chart and what to change. */
function designed(chart: string, instead: string, solve: () => number): number {
  try {
    return solve();
  } catch (e) {
    if (!(e instanceof RangeError)) throw e;
    throw new RangeError(`detection.budget: ${chart}: ${e.message}; allow fewer false alarms or a longer period, ${instead}`);
  }
}

export type DetectorDesign = ReturnType<typeof detectionLimits>;

/** Both sides of the change detectors' charts, each designed for its part of the budget. */
export interface ChangeDesign {
  /** The upward side: a signal opens a wear incident. Designed for `riseShare` of the budget. */
  readonly rise: DetectorDesign;
  readonly riseShare: number;
  /** The downward side (sided: two): a signal opens a sampling incident. Designed for `fallShare` of the budget. */
  readonly fall?: DetectorDesign;
  readonly fallShare: number;
}

/**
 * Every side of a chart that can open an incident spends the one false-alarm budget: the change detectors' share
 * (changeBudgetShare) goes to the rise side, less `detection.fallShare` of it for the fall side when the charts are
 * two-sided. Configured h and L apply to both sides as given.
 */
export function changeDesign(d: Detection, population: Pick<Population, 'peers'>): ChangeDesign {
  const shares = sideShares(d, population);
  if (shares.fall === undefined) return { rise: detectionLimits(d, shares.rise), riseShare: shares.rise, fallShare: 0 };
  return { rise: detectionLimits(d, shares.rise), riseShare: shares.rise, fall: detectionLimits(d, shares.fall), fallShare: shares.fall };
}

/**
 * Designs the charts of the built-in settings and of every configured group once. The limits are solved numerically
 * and remembered (arl/memo.ts), so a worker calls this at start: the first result of a group then does not wait for
 * the solvers (about 0.1–0.2 s on two cores). Returns the designs by group name ('' for the built-in settings).
 */
export function designConfiguredCharts(config: Config): Map<string, ChangeDesign> {
  const out = new Map<string, ChangeDesign>();
  for (const group of ['', ...config.groups.map((g) => g.name)]) {
    const settings = resolveSettings(config, { unit: '', component: '', ...(group !== '' && { group }) });
    out.set(group, changeDesign(settings.detection, settings.population));
  }
  return out;
}
