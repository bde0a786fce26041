/** The forecast in one sentence per limit, the way an engineer reads it. */
import { MEASURANDS, type Measurand } from '../../domain/measurands.ts';
import { formatNumber, measurandTitle, quantity } from '../rules/ruleInput.ts';
import type { ForecastTime, LimitForecast } from './model.ts';
import type { LimitSpec } from './limits.ts';

export interface WordingContext {
  readonly chargeHours: number | null;
  /** The charge length is the group's plan (else: expected from the past charges). */
  readonly planned: boolean;
  readonly horizonHours: number;
  readonly residualFraction: number;
  /**
   * Without a planned charge length, where the present charge (`oilHours`) has already run longer than the longest
   * (`longest`) of the past charges remembered (`charges`): no oil change is assumed, and a crossing says so.
   */
  readonly outlasted?: { readonly oilHours: number; readonly longest: number; readonly charges: number };
}

/** Hours to two significant figures, at least 1: "about 420 h" reads as an estimate, not a count. */
export function roundHours(h: number): string {
  return h < 1 ? '1' : String(Number(h.toPrecision(2)));
}

const MONTHS = ['Jan', 'Feb', 'Mar', 'Apr', 'May', 'Jun', 'Jul', 'Aug', 'Sep', 'Oct', 'Nov', 'Dec'];

/** "2027-03-14" → "14 Mar 2027". */
export function dayText(isoDate: string): string {
  const [y, mo, d] = isoDate.split('-');
  return `${Number(d)} ${MONTHS[Number(mo) - 1] ?? mo} ${y}`;
}

type Parts = Omit<LimitForecast, 'text'>;

export function forecastText(m: Measurand, spec: LimitSpec, f: Parts, ctx: WordingContext, estimate?: number): string {
  const title = measurandTitle(m);
  const level = `the ${f.severity} level of ${quantity(m, f.level)} (${spec.note})`;
  const reach = f.side === 'above' ? 'reaches' : 'falls to';
  switch (f.outcome) {
    case 'not-enough-history':
      return `${title}: not enough history to forecast (${f.reason}).`;
    case 'already':
      return `${title} is already ${f.side} ${level} by the present estimate${estimate === undefined ? '' : ` (${quantity(m, estimate)})`}.`;
    case 'crossing': {
      const c = f.central!;
      const range = f.late === undefined ? `${roundHours(f.early!.hoursFromNow)} h or later, past the ${openEnd(ctx)}` : `${roundHours(f.early!.hoursFromNow)}–${roundHours(f.late.hoursFromNow)} h`;
      return `At the present trend, ${title} ${reach} ${level} in about ${roundHours(c.hoursFromNow)} operating hours (${range})${dateText(c)}${outlastedText(ctx)}.`;
    }
    case 'after-oil-change': {
      const verb = f.side === 'above' ? 'reach' : 'fall to';
      if (ctx.chargeHours === null) return `At the present trend, ${title} does not ${verb} ${level} within the next ${formatNumber(ctx.horizonHours)} operating hours.`;
      const accumulates = MEASURANDS[m].kind === 'wear' || MEASURANDS[m].kind === 'contaminant';
      const when = ctx.planned ? `planned at ${formatNumber(ctx.chargeHours)} oil hours` : `expected at about ${formatNumber(ctx.chargeHours)} oil hours, as on past charges`;
      if (!accumulates) return `At the present trend, ${title} does not ${verb} ${level} before the next oil change (${when}).`;
      const next = f.nextCharge?.oilHours;
      const after =
        next === undefined
          ? ''
          : next === null
            ? '; nor in the next charge'
            : `; from the ${formatNumber(ctx.residualFraction * 100)} % residual oil left at the drain, it would about ${roundHours(next)} oil hours into the next charge`;
      return `At the present trend, ${title} does not ${verb} ${level} within this charge (oil change ${when})${after}.`;
    }
  }
}

/** The assumption behind a crossing where the present charge has outlasted the past ones: no oil change before it. */
function outlastedText(ctx: WordingContext): string {
  const o = ctx.outlasted;
  if (o === undefined) return '';
  const past = o.charges === 1 ? `the last charge (${formatNumber(o.longest)})` : `each of the last ${o.charges} (at most ${formatNumber(o.longest)})`;
  return `, if the oil is not changed first (this charge, at ${formatNumber(o.oilHours)} oil hours, has run longer than ${past})`;
}

/** Where an interval open above ends: the planned oil change, the one expected from past charges (said so), or the horizon. */
function openEnd(ctx: WordingContext): string {
  if (ctx.chargeHours === null) return 'forecast horizon';
  return ctx.planned ? 'planned oil change' : `oil change expected at about ${formatNumber(ctx.chargeHours)} oil hours, as on past charges`;
}

function dateText(t: ForecastTime): string {
  return t.date === undefined ? '' : `, around ${dayText(t.date)}`;
}
