/**
 * The time-to-limit forecast as the product uses it: a pure function of the evaluation that leaves the detectors'
 * numbers as they were, says "not enough history" where it would mislead, and travels with an incident's evidence
 * into the e-mail, the CloudEvent (webhook and MQTT data), the series and the chart. The interval arithmetic itself
 * is checked against reference libraries in tests/reference/forecast-interval.test.ts; its coverage on fleets with
 * known true rates is measured by `npm run bench -- --only forecast`. Simulated data: the documented noise model.
 */
import fc from 'fast-check';
import { afterEach, describe, expect, it, vi } from 'vitest';
import { evaluateComponent } from '../../src/analysis/evaluate.ts';
import { forecastComponent } from '../../src/analysis/forecast/forecastComponent.ts';
import { buildComponentSeries } from '../../src/charts/componentSeries.ts';
import { renderTrendChart } from '../../src/charts/trendChart/trendChart.ts';
import { FORECAST_CAUTION } from '../../src/domain/caution.ts';
import { DEFAULT_FORECAST } from '../../src/domain/forecastConfig.ts';
import { parseConfig } from '../../src/domain/configFile.ts';
import type { Sample } from '../../src/domain/event.ts';
import type { Finding } from '../../src/domain/finding.ts';
import { resolveSettings, type ComponentSettings } from '../../src/domain/settings.ts';
import { applySteps } from '../../src/incidents/applySteps.ts';
import { emptyComponentIncidents, type NotifyEffect } from '../../src/incidents/model.ts';
import { incidentRules } from '../../src/incidents/policy.ts';
import { toCloudEvent } from '../../src/notify/cloudEvent.ts';
import { renderIncidentEmail } from '../../src/channels/email/emailRender.ts';
import { incidentMessage } from '../../src/notify/incidentMessage.ts';
import { simulatedSamples, steppedFe } from '../helpers/wearFleet.ts';

const CONFIG = `
detection:
  measurands: [Fe]
  labNoise: { absolute: 1, relative: 0.05 }
  runningInHours: 0
  budget: { sampleIntervalHours: 120 }
channels:
  webhooks: [{ name: ops, url: "https://ops.example/hooks", secrets: [WEBHOOK_SECRET] }]
escalation:
  policies: [{ name: all, tiers: [{ afterMinutes: 0, webhooks: [ops] }] }]
groups:
  - name: sim-gearboxes
    sumpLitres: 200
    residualFraction: 0.1
    chargeHours: 1000
    limits: { Fe: { caution: 40, alarm: 60 } }
`;
const config = parseConfig(CONFIG);

function settingsOf(samples: readonly Sample[], over: Partial<ComponentSettings> = {}): ComponentSettings {
  return { ...resolveSettings(config, samples[0]!), ...over };
}

afterEach(() => vi.useRealTimers());

describe('forecast in the analysis core', () => {
  it("leaves every detector's numbers and every finding as they were", () => {
    const samples = simulatedSamples({ samples: 60, intervalHours: 120, metals: steppedFe(3000, 2.5) }, 21);
    const on = evaluateComponent(samples, settingsOf(samples));
    const off = evaluateComponent(samples, settingsOf(samples, { forecast: { ...settingsOf(samples).forecast!, enabled: false } }));
    expect(on.steps.some((s) => s.findings.length > 0)).toBe(true);
    expect(JSON.stringify(on.steps)).toBe(JSON.stringify(off.steps));
    expect(on.state.forecast).toBeDefined();
    expect(off.state.forecast).toBeUndefined();
  });

  it('is deterministic and reads no clock', () => {
    const samples = simulatedSamples({ samples: 33, intervalHours: 120 }, 13);
    const settings = settingsOf(samples);
    const { state } = evaluateComponent(samples, settings);
    vi.useFakeTimers();
    vi.setSystemTime(new Date('2020-01-01T00:00:00Z'));
    const a = JSON.stringify(forecastComponent(state, settings, undefined));
    vi.setSystemTime(new Date('2035-06-01T00:00:00Z'));
    const b = JSON.stringify(forecastComponent(state, settings, undefined));
    expect(a).toBe(b);
  });

  it('projects the filter forward: central crossing where level + rate·τ (with make-up oil) reaches the level, dated by the recent hours per day', () => {
    const samples = simulatedSamples({ samples: 33, intervalHours: 120 }, 13);
    const settings = settingsOf(samples);
    const f = forecastComponent(evaluateComponent(samples, settings).state, settings, undefined, { measurands: ['Fe'] });
    const fe = f.measurands[0]!;
    expect(fe.status).toBe('forecast');
    expect(fe.basis!.method).toBe('filter');
    // The simulated rate is 0.04 ppm/h (tests/helpers/wearFleet.ts); the filter's estimate is near it.
    expect(fe.basis!.rate).toBeGreaterThan(0.02);
    expect(fe.basis!.rate).toBeLessThan(0.08);
    const caution = fe.limits.find((l) => l.severity === 'caution')!;
    expect(caution.outcome).toBe('crossing');
    const c = caution.central!;
    // Without make-up oil the median crossing is exactly (L − level)/rate; 1 L per 100 h into 200 L changes it little.
    const plain = fe.basis!.oilHours + (40 - fe.basis!.level) / fe.basis!.rate;
    expect(Math.abs(c.oilHours - plain)).toBeLessThan(0.02 * plain);
    expect(caution.early!.oilHours).toBeLessThan(c.oilHours);
    expect(caution.late === undefined || caution.late.oilHours > c.oilHours).toBe(true);
    // The simulation runs round the clock: 24 h per day, so the date is hoursFromNow/24 days after the latest sample.
    expect(f.hoursPerDay).toBeCloseTo(24, 0);
    const expected = new Date(Date.parse(f.sampledAt) + (c.hoursFromNow / f.hoursPerDay!) * 86_400_000).toISOString().slice(0, 10);
    expect(c.date).toBe(expected);
    expect(caution.text).toMatch(/^At the present trend, Fe reaches the caution level of 40 ppm .* in about [\d.]+ operating hours \([\d.]+–[\d.]+ h\), around \d+ \w{3} \d{4}\.$/);
  });

  it('beyond the planned oil change: "not within this charge", and where the next charge would cross from the residual oil', () => {
    const samples = simulatedSamples({ samples: 33, intervalHours: 120 }, 13);
    const settings = settingsOf(samples);
    const f = forecastComponent(evaluateComponent(samples, settings).state, settings, undefined, { measurands: ['Fe'] });
    const alarm = f.measurands[0]!.limits.find((l) => l.severity === 'alarm')!;
    expect(alarm.outcome).toBe('after-oil-change');
    expect(alarm.text).toContain('within this charge (oil change planned at 1000 oil hours)');
    expect(alarm.nextCharge).toBeDefined();
    // The next charge starts from 10 % of the level at the drain and grows at the same rate: whether it crosses
    // within 1000 oil hours follows from the same arithmetic.
    const b = f.measurands[0]!.basis!;
    const atDrain = b.level + b.rate * (1000 - b.oilHours);
    const next = (60 - 0.1 * atDrain) / b.rate;
    if (next > 1000) {
      expect(alarm.nextCharge!.oilHours).toBeNull();
      expect(alarm.text).toContain('nor in the next charge');
    } else {
      expect(Math.abs(alarm.nextCharge!.oilHours! - next)).toBeLessThan(0.05 * next);
      expect(alarm.text).toContain('from the 10 % residual oil left at the drain');
    }
  });

  it('without a planned charge length, expects the oil change where the recent past charges ended', () => {
    const samples = simulatedSamples({ samples: 33, intervalHours: 120 }, 13);
    const { chargeHours: _planned, ...unplanned } = settingsOf(samples);
    const { state } = evaluateComponent(samples, unplanned);
    const f = forecastComponent(state, unplanned, undefined, { measurands: ['Fe'] });
    const past = state.forecast!.pastCharges!;
    expect(past.length).toBeGreaterThan(0);
    // The simulated oil is changed every 1000 oil hours (tests/helpers/wearFleet.ts): the last samples of past charges lie just before.
    for (const h of past) expect(h).toBeGreaterThan(700);
    expect(f.chargeHoursFrom).toBe('past-charges');
    expect(f.chargeHours).toBe(Math.max(...past));
    const alarm = f.measurands[0]!.limits.find((l) => l.severity === 'alarm')!;
    if (alarm.outcome === 'after-oil-change') expect(alarm.text).toContain('as on past charges');
  });

  it('where the present charge has outlasted the past ones, assumes no oil change and says so beside a crossing', () => {
    const samples = simulatedSamples({ samples: 33, intervalHours: 120 }, 13);
    const { chargeHours: _planned, ...unplanned } = settingsOf(samples);
    const { state } = evaluateComponent(samples, unplanned);
    const now = state.charge!.lastOilHours!;
    // The past charges as a drain interval shorter than the present charge has run.
    const shorter = [0.5, 0.8, 0.7].map((share) => Math.round(share * now));
    const outlasted = { ...state, forecast: { ...state.forecast!, pastCharges: shorter } };
    const f = forecastComponent(outlasted, unplanned, undefined, { measurands: ['Fe'] });
    expect(f.chargeHours).toBeNull();
    expect(f.horizonOilHours).toBe(now + DEFAULT_FORECAST.horizonHours);
    const crossings = f.measurands[0]!.limits.filter((l) => l.outcome === 'crossing');
    expect(crossings.length).toBeGreaterThan(0);
    for (const c of crossings) {
      expect(c.text).toContain(`, if the oil is not changed first (this charge, at ${now} oil hours, has run longer than each of the last 3 (at most ${Math.max(...shorter)}))`);
    }
    // Within the past charges' length, the oil change is expected there and no crossing carries the clause.
    const usual = forecastComponent(state, unplanned, undefined, { measurands: ['Fe'] });
    expect(usual.chargeHoursFrom).toBe('past-charges');
    for (const l of usual.measurands[0]!.limits) expect(l.text).not.toContain('if the oil is not changed first');
  });

  it('says "not enough history to forecast" on a first sample and on a censored latest reading', () => {
    const samples = simulatedSamples({ samples: 33, intervalHours: 120 }, 13);
    const settings = settingsOf(samples);
    const first = forecastComponent(evaluateComponent(samples.slice(0, 1), settings).state, settings, undefined, { measurands: ['Fe'] });
    expect(first.measurands[0]!.status).toBe('not-enough-history');
    expect(first.measurands[0]!.limits[0]!.text).toMatch(/^Fe: not enough history to forecast \(.+\)\.$/);
    const last = samples.at(-1)!;
    // "<x" at about the reading it replaces: below the lab's reporting range, not a fall a sampling check would flag.
    const before = last.readings.Fe;
    const near = before !== undefined && before.kind === 'value' ? Math.ceil(before.value) + 1 : 5;
    const censored: Sample = { ...last, readings: { ...last.readings, Fe: { kind: 'censored', bound: 'below', limit: near } } };
    const f = forecastComponent(evaluateComponent([...samples.slice(0, -1), censored], settings).state, settings, undefined, { measurands: ['Fe'] });
    expect(f.measurands[0]!.status).toBe('not-enough-history');
    expect(f.measurands[0]!.reason).toContain('censored');
    // Past the gates the forecast is still made, and names the gate (what the benchmark measures).
    const ungated = forecastComponent(evaluateComponent([...samples.slice(0, -1), censored], settings).state, settings, undefined, { measurands: ['Fe'], gates: false });
    expect(ungated.measurands[0]!.status).toBe('forecast');
    expect(ungated.measurands[0]!.gatedBy).toContain('censored');
  });
});

describe('forecast properties', () => {
  it('on any simulated history: never throws, percentiles in order, finite numbers, band around the central line', () => {
    fc.assert(
      fc.property(
        fc.integer({ min: 1, max: 1000 }),
        fc.integer({ min: 1, max: 45 }),
        fc.double({ min: 0.005, max: 0.2, noNaN: true }),
        fc.constantFrom(1, 1.5, 3),
        fc.constantFrom(60, 120, 250),
        (seed, n, rate, factor, interval) => {
          const samples = simulatedSamples({ samples: n, intervalHours: interval, metals: { Fe: { rate, processVariance: 0.4 * rate, step: { atHours: 1500, factor } } } }, seed);
          const settings = settingsOf(samples);
          const f = forecastComponent(evaluateComponent(samples, settings).state, settings, undefined);
          for (const m of f.measurands) {
            for (const p of m.projection) expect(p.low <= p.central + 1e-9 && p.central <= p.high + 1e-9).toBe(true);
            for (const l of m.limits) {
              expect(l.text.length).toBeGreaterThan(0);
              const times = [l.early, l.central, l.late].filter((t) => t !== undefined);
              for (const t of times) expect(Number.isFinite(t.oilHours) && t.hoursFromNow >= 0).toBe(true);
              if (l.early && l.central) expect(l.early.oilHours).toBeLessThanOrEqual(l.central.oilHours + 1e-6);
              if (l.central && l.late) expect(l.central.oilHours).toBeLessThanOrEqual(l.late.oilHours + 1e-6);
              if (l.outcome === 'crossing') expect(l.central).toBeDefined();
            }
          }
        },
      ),
      { numRuns: 40 },
    );
  });
});

describe('forecast where it shows', () => {
  const samples = simulatedSamples({ samples: 33, intervalHours: 120 }, 13);
  const settings = settingsOf(samples);
  const evaluation = evaluateComponent(samples, settings);
  const last = samples.at(-1)!;

  it('travels with the incident evidence into the notify effect, the e-mail and the CloudEvent data', () => {
    const forecast = forecastComponent(evaluation.state, settings, undefined);
    const finding: Finding = {
      unit: last.unit,
      component: last.component,
      group: settings.group,
      measurand: 'Fe',
      rule: 'cusum',
      disposition: 'incident',
      severity: 'caution',
      value: 6,
      threshold: 5,
      basis: 'cusum',
      sampleId: last.sampleId,
      sampledAt: last.sampledAt,
      explanation: 'Fe wear rate shifted up.',
    };
    const now = new Date(last.time + 3_600_000);
    const result = applySteps(emptyComponentIncidents(last.unit, last.component), [{ sampleId: last.sampleId, sampledAt: last.sampledAt, findings: [finding], forecast }], {
      group: settings.group,
      now,
      quietBefore: new Date(now.getTime() - 30 * 86_400_000),
      rules: incidentRules(config),
    });
    const incident = Object.values(result.state.incidents)[0]!;
    expect(incident.forecast!.map((f) => f.measurand)).toEqual(['Fe', 'Fe']);
    expect(incident.forecast!.every((f) => f.outcome === 'crossing' || f.outcome === 'after-oil-change')).toBe(true);
    const effect = result.effects.find((e): e is NotifyEffect => e.kind === 'notify')!;
    expect(effect.incident.forecast).toEqual(incident.forecast);
    const msg = incidentMessage(effect, samples, 'https://wearshift.example');
    expect(msg.forecast!.caution).toContain(FORECAST_CAUTION);
    expect(msg.forecast!.caution).toContain('equipment maker');
    const crossing = msg.forecast!.items.find((i) => i.outcome === 'crossing')!;
    expect(crossing.central!.hoursFromNow).toBeGreaterThan(0);
    const email = renderIncidentEmail(msg, { from: 'wearshift <alerts@plant.example>', to: 'oncall@plant.example' });
    expect(email.text).toContain('Time to limit');
    expect(email.text).toContain(crossing.text);
    expect(email.text).toContain(FORECAST_CAUTION);
    expect(email.html).toContain('<h3>Time to limit</h3>');
    const event = toCloudEvent(msg, { time: now });
    expect(JSON.parse(JSON.stringify(event)).data.forecast.items[0].text).toBe(msg.forecast!.items[0]!.text);
  });

  it('carries no "not enough history" line for a measurand whose reading is past every level it would forecast', () => {
    const first = samples[0]!;
    // The group's fixed Fe limits (CONFIG): caution 40, alarm 60 ppm; with a new-oil viscosity of 14 mm²/s, the
    // condition levels 10 % (caution) and 20 % (alarm) either way.
    const withNewOil = parseConfig(CONFIG.replace('chargeHours: 1000', 'chargeHours: 1000\n    newOil: { v100: 14 }'));
    const oilSettings = { ...resolveSettings(withNewOil, first) };
    const incidentOn = (m: 'Fe' | 'v100', value: number) => {
      const sample: Sample = { ...first, readings: { ...first.readings, [m]: { kind: 'value', value } } };
      const evaluated = evaluateComponent([sample], oilSettings);
      const step = evaluated.steps.at(-1)!;
      expect(step.findings.some((f) => f.measurand === m && f.rule === (m === 'Fe' ? 'limit' : 'condition'))).toBe(true);
      const forecast = forecastComponent(evaluated.state, oilSettings, undefined);
      expect(forecast.measurands.find((x) => x.measurand === m)!.status).toBe('not-enough-history');
      const now = new Date(first.time + 3_600_000);
      const result = applySteps(emptyComponentIncidents(first.unit, first.component), [{ ...step, forecast }], {
        group: oilSettings.group,
        now,
        quietBefore: new Date(now.getTime() - 30 * 86_400_000),
        rules: incidentRules(withNewOil),
      });
      return Object.values(result.state.incidents)[0]!;
    };
    const between = incidentOn('Fe', 48);
    expect(between.forecast!.map((f) => [f.severity, f.side, f.outcome])).toEqual([['alarm', 'above', 'not-enough-history']]);
    expect(between.forecast![0]!.text).toMatch(/^Fe: not enough history to forecast/);
    const past = incidentOn('Fe', 75);
    expect(past.severity).toBe('alarm');
    expect(past.forecast).toEqual([]);
    // Past the upper alarm level: no line about when it might fall to the lower levels either.
    expect(incidentOn('v100', 15.8).forecast!.map((f) => [f.severity, f.side])).toEqual([['alarm', 'above']]);
    expect(incidentOn('v100', 22).forecast).toEqual([]);
  });

  it('is in the series and drawn dashed with its band on the trend chart', () => {
    const series = buildComponentSeries(evaluation, settings, undefined, { measurands: ['Fe'] });
    expect(series.forecast!.caution).toContain(FORECAST_CAUTION);
    const fe = series.measurands[0]!.forecast!;
    expect(fe.projection.length).toBeGreaterThan(2);
    expect(fe.projection.every((p) => p.low <= p.central && p.central <= p.high && p.at !== undefined)).toBe(true);
    const svg = renderTrendChart(series, 'Fe');
    const nearest = fe.limits.filter((l) => l.outcome === 'crossing')[0]!;
    expect(svg).toContain(`Dashed projection: ${nearest.text.replaceAll('&', '&amp;')}`);
    expect(svg).toMatch(/<polygon data-forecast-band="10-90" points="[\d., -]+"/);
    expect(svg).toMatch(/<path data-forecast-central="true" d="M[\d.,L]+" fill="none" stroke="#2b2b2b" stroke-width="1.6" stroke-dasharray="5 4"\/>/);
    const off = buildComponentSeries(evaluation, { ...settings, forecast: { ...settings.forecast!, enabled: false } }, undefined, { measurands: ['Fe'] });
    expect(off.forecast).toBeNull();
    expect(renderTrendChart(off, 'Fe')).not.toContain('data-forecast');
  });
});
