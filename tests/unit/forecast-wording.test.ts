/**
 * The sentence of a crossing whose interval is open above (src/analysis/forecast/wording.ts): it ends at the planned
 * oil change only when one is planned (`chargeHours` configured); an oil change expected from past charges is said
 * to be so, as the README's "Time to limit" promises, and without either the interval ends at the horizon.
 */
import { describe, expect, it } from 'vitest';
import { forecastText, type WordingContext } from '../../src/analysis/forecast/wording.ts';
import type { LimitSpec } from '../../src/analysis/forecast/limits.ts';
import type { LimitForecast } from '../../src/analysis/forecast/model.ts';

const spec: LimitSpec = { source: 'fixed', severity: 'alarm', side: 'above', levelAt: () => 60, note: 'fixed limit' };
const openAbove: Omit<LimitForecast, 'text'> = {
  measurand: 'Fe',
  source: 'fixed',
  severity: 'alarm',
  side: 'above',
  level: 60,
  outcome: 'crossing',
  central: { oilHours: 900, hoursFromNow: 520 },
  early: { oilHours: 590, hoursFromNow: 210 },
};
const base = { horizonHours: 2000, residualFraction: 0.1 };

function text(ctx: WordingContext): string {
  return forecastText('Fe', spec, openAbove, ctx);
}

describe('forecast wording of an interval open above', () => {
  it('names the planned oil change when the charge length is planned', () => {
    const t = text({ ...base, chargeHours: 1000, planned: true });
    expect(t).toContain('in about 520 operating hours (210 h or later, past the planned oil change)');
  });

  it('names an oil change expected from past charges, never a planned one, when no charge length is configured', () => {
    const t = text({ ...base, chargeHours: 980, planned: false });
    expect(t).not.toContain('planned');
    expect(t).toContain('in about 520 operating hours (210 h or later, past the oil change expected at about 980 oil hours, as on past charges)');
  });

  it('names the forecast horizon when no oil change is planned or expected', () => {
    const t = text({ ...base, chargeHours: null, planned: false });
    expect(t).toContain('(210 h or later, past the forecast horizon)');
  });
});
