/** Smoke test of the forecast benchmark part (bench/forecast.ts) at a tiny size, so that the bench does not rot. */
import { describe, expect, it } from 'vitest';
import { runForecast } from '../../bench/forecast.ts';

describe('bench: forecast', () => {
  it('scores forecasts against the true wear paths in every scenario', () => {
    const r = runForecast({ seed: 3, components: 4, trainingComponents: 4, samples: 40 });
    const steady = (r.json.steady as { stated: { n: number; coverage: number; medianAbsErrorHours: number } }).stated;
    expect(steady.n).toBeGreaterThan(20);
    // Steady wear at the present trend is what the forecast models: most true crossings fall inside the interval.
    expect(steady.coverage).toBeGreaterThan(0.6);
    expect(steady.medianAbsErrorHours).toBeGreaterThan(0);
    expect(steady.medianAbsErrorHours).toBeLessThan(300);
    for (const scenario of ['doubled', 'ramp', 'censored']) expect(r.json[scenario]).toBeDefined();
    expect(r.table.rows.length).toBeGreaterThanOrEqual(4);
  });
});
