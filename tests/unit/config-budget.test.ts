/**
 * The false-alarm budget is checked when the configuration is parsed: each side of a chart must get an in-control run
 * length the limits can be derived for, else the configuration is refused naming detection.budget and the range,
 * instead of a worker failing on its first design.
 */
import { describe, expect, it } from 'vitest';
import { cusumArl } from '../../src/analysis/arl/cusumArl.ts';
import { ewmaArl } from '../../src/analysis/arl/ewmaArl.ts';
import { checkTargetRunLength } from '../../src/analysis/arl/runLengthEquation.ts';
import { cusumDecisionInterval } from '../../src/analysis/arl/solveCusum.ts';
import { ewmaLimitWidth } from '../../src/analysis/arl/solveEwma.ts';
import { changeDesign, designConfiguredCharts, detectionLimits } from '../../src/analysis/budget.ts';
import { ConfigSchema } from '../../src/domain/config.ts';
import { budgetIssue, cusumShortestRunLength, DESIGNABLE_RUN_LENGTH } from '../../src/domain/configBudget.ts';
import { parseConfig } from '../../src/domain/configFile.ts';
import { InputError } from '../../src/domain/errors.ts';

/** The issues of a configuration object, as `path: message`. */
function issues(input: unknown): string[] {
  const parsed = ConfigSchema.safeParse(input);
  return parsed.success ? [] : parsed.error.issues.map((i) => `${i.path.join('.')}: ${i.message}`);
}

describe('detection.budget when the configuration is parsed', () => {
  it('refuses a budget that asks each chart to alarm falsely within a sample, naming the field, the run length and the range', () => {
    // 35.04 samples a year / 1000 alarms × 14 charts / 0.72 (the rise side's part) = 0.68 samples.
    expect(() => parseConfig('detection:\n  budget: { alarms: 1000, years: 1 }\n', 'site.yaml')).toThrow(InputError);
    expect(() => parseConfig('detection:\n  budget: { alarms: 1000, years: 1 }\n', 'site.yaml')).toThrow(
      "site.yaml: invalid configuration\n  detection.budget: a budget of 1000 false alarm(s) per component per 1 year(s) gives each chart's rise side an in-control run length of 0.6813 samples " +
        '(1 year(s) × 8760 h / 250 h = 35.04 samples per component, / 1000 false alarm(s) × 14 chart(s) / 0.72 of the budget); ' +
        'chart limits can be derived for 20 to 100000000 samples: allow fewer false alarms or a longer period, or set detection.cusum.h and detection.ewma.L',
    );
  });

  it('refuses a budget past the run lengths the integral equations solve reliably', () => {
    // 200000 × 35.04 × 14 / 0.72 = 136 million samples.
    const found = issues({ detection: { budget: { alarms: 1, years: 200000 } } });
    expect(found).toHaveLength(1);
    expect(found[0]).toMatch(/^detection\.budget: a budget of 1 false alarm\(s\) per component per 200000 year\(s\) gives each chart's rise side an in-control run length of 136300000 samples .*allow more false alarms or a shorter period/);
    // The fall side gets its own, smaller part of the budget: a tiny detection.fallShare puts it out of range alone.
    expect(issues({ detection: { fallShare: 1e-6 } })).toEqual([expect.stringMatching(/^detection\.budget: .*each chart's fall side an in-control run length of 3066000000 samples .* \/ 8e-7 of the budget\)/)]);
    // One-sided charts have no fall side to design.
    expect(issues({ detection: { fallShare: 1e-6, sided: 'up' } })).toEqual([]);
  });

  it('refuses a budget shorter than the shortest run length a CUSUM with the configured k can be designed for', () => {
    // With h → 0 a one-sided CUSUM signals when one standardised value exceeds k: once in 1 / (1 − Φ(k)) samples.
    // Standard normal table (any statistics handbook): Φ(1.5) = 0.93319, Φ(3) = 0.99865.
    expect(cusumShortestRunLength(1.5)).toBeCloseTo(1 / (1 - 0.93319), 1);
    expect(cusumShortestRunLength(3)).toBeCloseTo(1 / (1 - 0.99865), 0);
    // 35.04 samples a year / 20 alarms × 14 charts / 0.72 = 34 samples per chart: in range, but not with k = 3.
    expect(issues({ detection: { budget: { alarms: 20, years: 1 }, cusum: { k: 3 } } })).toEqual([
      expect.stringMatching(/^detection\.budget: .* run length of 34\.07 samples .*a CUSUM with reference value k = 3 alarms falsely every 740\.8 samples at the most, even with the smallest decision interval: .*choose a smaller detection\.cusum\.k, or set detection\.cusum\.h$/),
    ]);
    // The designer agrees on either side of that figure.
    expect(() => cusumDecisionInterval({ k: 3, arl0: 700, sided: 'one' })).toThrow(/no decision interval h/);
    expect(cusumDecisionInterval({ k: 3, arl0: 760, sided: 'one' })).toBeGreaterThan(0);
    // Where the limits are designed (a worker's start), the refusal names the chart and what to change as well: here
    // the whole budget on one side, 35.04 / 20 × 14 = 24.53 samples.
    const detection = ConfigSchema.parse({ detection: { budget: { alarms: 20, years: 1 } } }).detection;
    expect(() => detectionLimits({ ...detection, cusum: { ...detection.cusum, k: 3 } })).toThrow(
      /^detection\.budget: a CUSUM with k = 3: no decision interval h gives a run length as short as 24\.528; allow fewer false alarms or a longer period, a smaller detection\.cusum\.k, or set detection\.cusum\.h$/,
    );
    // The same budget with the usual k, or with h set, is taken.
    expect(issues({ detection: { budget: { alarms: 20, years: 1 }, cusum: { k: 0.5 } } })).toEqual([]);
    expect(issues({ detection: { budget: { alarms: 20, years: 1 }, cusum: { k: 3, h: 1 } } })).toEqual([]);
  });

  it('refuses an EWMA smoothing constant below the published design tables at load, in a group too', () => {
    // λ = 0.001 took 85 s of CPU in the limit design before it gave up; now the file is refused as it is read.
    expect(issues({ detection: { ewma: { lambda: 0.001 } } })).toEqual([expect.stringMatching(/^detection\.ewma\.lambda: must be at least 0\.01, the smallest smoothing constant of the published EWMA design tables/)]);
    expect(issues({ groups: [{ name: 'slow', detection: { ewma: { lambda: 0.005 } } }] })).toEqual([expect.stringMatching(/^groups\.0\.detection\.ewma\.lambda: must be at least 0\.01/)]);
    expect(issues({ detection: { ewma: { lambda: 0.01 } } })).toEqual([]);
    // The analysis core refuses it as well, at once, naming the range.
    const started = process.hrtime.bigint();
    expect(() => ewmaLimitWidth({ lambda: 0.001, arl0: 500, sided: 'one', exactLimits: true })).toThrow(/λ must be from 0\.01 to 1 .*got 0\.001/);
    expect(() => ewmaArl({ lambda: 0.009, L: 3, shift: 0, sided: 'two' })).toThrow(RangeError);
    // Not a timing claim: the refusal comes before any run-length integral is set up (seconds, not the minute and more of the solver).
    expect(Number(process.hrtime.bigint() - started) / 1e9).toBeLessThan(30);
  });

  it('checks each group with its resolved settings, once where the group changes nothing', () => {
    const found = issues({
      detection: { budget: { alarms: 1, years: 200000 } },
      groups: [
        { name: 'plain' },
        { name: 'loose', detection: { budget: { alarms: 300, years: 1 } } },
        { name: 'fine', detection: { budget: { alarms: 1, years: 5 } } },
        // Overrides something else and inherits the top level's budget: the same figures, reported once.
        { name: 'same', detection: { runningInHours: 100 } },
      ],
    });
    expect(found.map((f) => f.slice(0, f.indexOf(':')))).toEqual(['detection.budget', 'groups.1.detection.budget']);
    expect(found[1]).toMatch(/with this group's settings, a budget of 300 false alarm\(s\) per component per 1 year\(s\) gives each chart's rise side an in-control run length of 2\.271 samples/);
    // A group with fewer charts needs a shorter run length per chart from the same budget: 35.04 / 22 × 14 / 0.72 =
    // 31 samples at the top level, × 2 / 14 = 4.4 for a group watching iron alone.
    expect(issues({ detection: { budget: { alarms: 22, years: 1 } }, groups: [{ name: 'one-metal', detection: { measurands: ['Fe'] } }] })).toEqual([
      expect.stringMatching(/^groups\.0\.detection\.budget: with this group's settings, .*rise side an in-control run length of 4\.424 samples .*× 2 chart\(s\)/),
    ]);
  });

  it('leaves the budget alone when h and L are both set: nothing is derived from it', () => {
    expect(issues({ detection: { budget: { alarms: 1000, years: 1 }, cusum: { h: 5 }, ewma: { L: 3 } } })).toEqual([]);
    // One of them derived is enough for the check.
    expect(issues({ detection: { budget: { alarms: 1000, years: 1 }, cusum: { h: 5 } } })).toHaveLength(1);
  });

  it('accepts the built-in defaults', () => {
    const config = ConfigSchema.parse({});
    expect(budgetIssue(config.detection, config.population)).toBeUndefined();
    expect(issues({})).toEqual([]);
  });
});

describe('the designable range', () => {
  it('ends where the run-length equations stop: the solvers take its upper end and refuse beyond it', () => {
    expect(() => checkTargetRunLength(DESIGNABLE_RUN_LENGTH.max)).not.toThrow();
    expect(() => checkTargetRunLength(DESIGNABLE_RUN_LENGTH.max * 1.000001)).toThrow(RangeError);
  });

  it('lets the solvers meet both ends for the k, headstart and λ of the usual designs (k 0.25–1.5, λ 0.03–1: the range of the published tables, from memory)', () => {
    const ends = [
      { arl0: DESIGNABLE_RUN_LENGTH.min, ks: [0.25, 0.5, 1, 1.5], lambdas: [0.03, 0.05, 0.1, 0.2, 0.5, 1] },
      // At the upper end the limits are far from any edge of the solvers; the extremes stand for the rest.
      { arl0: DESIGNABLE_RUN_LENGTH.max, ks: [0.25, 1.5], lambdas: [0.03, 1] },
    ];
    for (const { arl0, ks, lambdas } of ends) {
      for (const k of ks) {
        for (const headstart of [0, 0.5]) {
          const h = cusumDecisionInterval({ k, arl0, sided: 'one', headstart });
          expect(cusumArl({ k, h, shift: 0, sided: 'one', headstart }) / arl0).toBeCloseTo(1, 4);
        }
      }
      for (const lambda of lambdas) {
        const L = ewmaLimitWidth({ lambda, arl0, sided: 'one', exactLimits: true });
        expect(ewmaArl({ lambda, L, shift: 0, sided: 'one', exactLimits: true }) / arl0).toBeCloseTo(1, 4);
      }
    }
  });

  it('a configuration accepted at either end designs its charts: the worker starts', () => {
    // Rise side: years × 35.04 × 14 / 0.72 samples per false alarm; fall side the same / 0.08.
    const atLeast = ConfigSchema.parse({ detection: { budget: { alarms: 1, years: 0.03 } } });
    const design = changeDesign(atLeast.detection, atLeast.population);
    expect(design.rise.arl0).toBeGreaterThanOrEqual(DESIGNABLE_RUN_LENGTH.min);
    expect(design.rise.arl0).toBeLessThan(25);
    const atMost = ConfigSchema.parse({ detection: { budget: { alarms: 1, years: 16000 } } });
    expect(changeDesign(atMost.detection, atMost.population).fall!.arl0).toBeGreaterThan(0.95 * DESIGNABLE_RUN_LENGTH.max);
    expect(() => designConfiguredCharts(atLeast)).not.toThrow();
    expect(() => designConfiguredCharts(atMost)).not.toThrow();
  });
});
