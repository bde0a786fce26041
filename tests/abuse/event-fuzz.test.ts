/**
 * Property-based fuzzing (fast-check) at the system's edge. The event schema must answer every JSON value
 * with a verdict, never an exception; what it accepts must survive the JSON transport and a rebuild from
 * the normalised sample unchanged; and whatever it accepts, the series builder and the whole evaluation
 * (every rule family, EWMA and CUSUM) must digest without throwing or producing non-finite findings.
 * (Arrival-order properties of the series builder: tests/unit/history.property.test.ts.)
 */
import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { evaluateComponent } from '../../src/analysis/evaluate.ts';
import { buildHistory } from '../../src/analysis/history.ts';
import { parseConfig } from '../../src/domain/configFile.ts';
import { parseResultEvent, type Sample } from '../../src/domain/event.ts';
import { SEVERITIES } from '../../src/domain/finding.ts';
import { MEASURAND_NAMES } from '../../src/domain/measurands.ts';
import { formatReading } from '../../src/domain/reading.ts';
import { resolveSettings } from '../../src/domain/settings.ts';

const RUNS = { numRuns: 400 };

/** Mostly valid, sometimes odd: the deeper checks only run when the shallow ones pass. */
const mostly = <T,>(valid: fc.Arbitrary<T>, odd: fc.Arbitrary<unknown>) => fc.oneof({ weight: 12, arbitrary: valid }, { weight: 1, arbitrary: odd });

const identifier = mostly(
  fc.oneof(fc.stringMatching(/^[A-Za-z0-9][A-Za-z0-9 ._:#()+\-/]{0,20}$/), fc.constantFrom('Pumpe Süd 2', 'ÉTAGE-3', '泵站-1', 'x'.repeat(80))),
  fc.oneof(fc.constantFrom('x'.repeat(81), '', ' lead', 'LS1\r\nBcc: x@y', 'LS1\u0000', 'LS\u202e1'), fc.string(), fc.jsonValue()),
);

const timestamp = mostly(
  fc.oneof(
    fc.date({ min: new Date('1970-01-01T00:00:00Z'), max: new Date('2100-01-01T00:00:00Z'), noInvalidDate: true }).map((d) => d.toISOString()),
    fc.constantFrom('2026-03-01T08:00:00+05:30', '2026-03-01T08:00:00.123456Z', '2026-03-01T08:00:00-00:00'),
  ),
  fc.oneof(fc.constantFrom('2026-03-01T08:00:00', '2026-02-30T08:00:00Z', '2026-03-01', 'yesterday', '+275760-09-13T00:00:00.000Z'), fc.jsonValue()),
);

// Hours to the nearest thousandth, as lab feeds give them; far smaller intervals are the explicit case below.
const hours = mostly(
  fc.oneof(fc.integer({ min: 0, max: 60_000 }), fc.integer({ min: 0, max: 1e10 }).map((n) => n / 1000), fc.constantFrom(0, 1e7)),
  fc.oneof(fc.constantFrom(-1, 1e7 + 1, Number.MAX_VALUE, -0), fc.double(), fc.jsonValue()),
);

const readingValue = mostly(
  // The largest readings accepted in ppm (1e6) and per mL (1e7); the bounds by unit refuse them in %, A/cm and mg KOH/g.
  fc.oneof(fc.double({ min: 0, max: 500, noNaN: true }), fc.constantFrom(0, 5e-324, 100, 1e6, 1e7, '<1', '< 0.5', '>5000', '<=3', '12', ' 7.5 ', '1e3', '>1000000')),
  fc.oneof(fc.constantFrom('1e999', '12,5', '18/16/13', '', '<1e5', 'trace', '-0', 1e9 + 1, 1e300, Number.MAX_VALUE, '>1000000001'), fc.double(), fc.jsonValue()),
);

const isoCode = mostly(
  fc.tuple(fc.option(fc.nat(28)), fc.nat(28), fc.nat(28)).map(([a, b, c]) => `${a ?? '-'}/${b}/${c}`),
  fc.oneof(fc.constantFrom('29/16/13', '18/16', '18-16-13', 18, '<1'), fc.jsonValue()),
);

const NUMERIC = MEASURAND_NAMES.filter((m) => m !== 'iso4406');

const readings = mostly(
  fc
    .tuple(fc.dictionary(fc.constantFrom(...NUMERIC), readingValue, { minKeys: 1, maxKeys: 8 }), fc.option(isoCode, { freq: 3 }))
    .map(([values, iso]) => (iso === null ? values : { ...values, iso4406: iso })),
  fc.oneof(fc.dictionary(fc.constantFrom('Qq', 'fe', '__proto__', 'constructor', 'toString', 'Fe '), readingValue, { minKeys: 1, maxKeys: 3 }), fc.jsonValue()),
);

/** Events close enough to valid that the schema's deeper checks run; optional fields come and go. */
const nearEvent = fc
  .record(
    {
      sampleId: identifier,
      revision: mostly(fc.integer({ min: 0, max: 3 }), fc.oneof(fc.constantFrom(1000, 1001, -1, 1.5), fc.jsonValue())),
      unit: identifier,
      component: identifier,
      group: identifier,
      sampledAt: timestamp,
      unitHours: hours,
      oilHours: hours,
      oilChanged: mostly(fc.boolean(), fc.jsonValue()),
      componentChanged: mostly(fc.boolean(), fc.jsonValue()),
      topUpLitres: hours,
      lab: identifier,
      readings,
    },
    { requiredKeys: ['sampleId', 'unit', 'component', 'sampledAt', 'readings'] },
  )
  .chain((e) => fc.oneof({ weight: 12, arbitrary: fc.constant(e) }, { weight: 1, arbitrary: fc.jsonValue().map((extra) => ({ ...e, extra })) }));

/** The event a normalised sample stands for. */
function eventOf(s: Sample): Record<string, unknown> {
  return {
    sampleId: s.sampleId,
    revision: s.revision,
    unit: s.unit,
    component: s.component,
    ...(s.group !== undefined && { group: s.group }),
    sampledAt: s.sampledAt,
    ...(s.unitHours !== undefined && { unitHours: s.unitHours }),
    ...(s.oilHours !== undefined && { oilHours: s.oilHours }),
    oilChanged: s.oilChanged,
    componentChanged: s.componentChanged,
    topUpLitres: s.topUpLitres,
    ...(s.lab !== undefined && { lab: s.lab }),
    readings: Object.fromEntries(Object.entries(s.readings).map(([m, r]) => [m, formatReading(r!)])),
  };
}

function verdictIsWellFormed(input: unknown): boolean {
  const parsed = parseResultEvent(input);
  if (parsed.ok) return true;
  expect(parsed.issues.length).toBeGreaterThan(0);
  for (const issue of parsed.issues) {
    expect(typeof issue.path).toBe('string');
    expect(issue.reason.trim()).not.toBe('');
  }
  return false;
}

describe('event schema under fuzzing', () => {
  it('answers any JSON value with a verdict, naming field and reason when it refuses', () => {
    fc.assert(fc.property(fc.jsonValue({ maxDepth: 6 }), (v) => void verdictIsWellFormed(v)), RUNS);
  });

  it('answers any JavaScript value too (a direct producer need not send JSON)', () => {
    fc.assert(fc.property(fc.anything({ withBigInt: true, withDate: true, withMap: true, withSet: true, withTypedArray: true, withSparseArray: true, withNullPrototype: true }), (v) => void verdictIsWellFormed(v)), RUNS);
  });

  it('answers deep nesting where readings belong, without overflowing the stack', () => {
    let deep: unknown = 1;
    for (let i = 0; i < 50_000; i++) deep = { Fe: deep };
    const parsed = parseResultEvent({ sampleId: 'D-1', unit: 'U', component: 'gearbox', sampledAt: '2026-03-01T08:00:00Z', readings: deep });
    expect(parsed.ok).toBe(false);
    expect(!parsed.ok && parsed.issues[0]!.path).toBe('readings.Fe');
  });

  it('keeps what it accepts through JSON and through a rebuild from the sample', () => {
    let accepted = 0;
    fc.assert(
      fc.property(nearEvent, (event) => {
        if (!verdictIsWellFormed(event)) return;
        accepted++;
        const parsed = parseResultEvent(event);
        if (!parsed.ok) throw new Error('unreachable');
        const s = parsed.sample;
        // What goes onto the queue is JSON; the worker must read the same sample back. (JSON has no -0:
        // a reading or hours of -0 arrive as 0, on every path alike.)
        const viaJson = JSON.parse(JSON.stringify(parsed)) as unknown;
        expect(JSON.parse(JSON.stringify(parseResultEvent(JSON.parse(JSON.stringify(event)))))).toEqual(viaJson);
        expect(JSON.parse(JSON.stringify(parseResultEvent(eventOf(s))))).toEqual(viaJson);
        expect(Number.isFinite(s.time)).toBe(true);
        expect(new Date(s.time).toISOString()).toBe(s.sampledAt);
        for (const r of Object.values(s.readings)) {
          if (r!.kind === 'value') expect(Number.isFinite(r!.value) && r!.value >= 0).toBe(true);
          if (r!.kind === 'censored') expect(Number.isFinite(r!.limit)).toBe(true);
        }
      }),
      { numRuns: 800 },
    );
    // The generator must reach the accepting side often enough for the property to mean something.
    expect(accepted).toBeGreaterThan(50);
  });
});

const CONFIGS = {
  defaults: resolveSettings(parseConfig(''), { unit: 'F-1', component: 'gearbox' }),
  everything: resolveSettings(
    parseConfig(`
detection: { measurands: [Fe, Cu, Al], runningInHours: 0, baselineIntervals: 2, cusum: { headstart: 0.5 } }
population: { minResults: 2, bandHours: [0, 100] }
groups:
  - name: fuzz
    sumpLitres: 0.5
    residualFraction: 0.9
    limits: { Fe: { caution: 45, alarm: 70 }, Si: { alarm: 25 }, p4: { alarm: 4000 } }
    rateLimits: { Fe: { caution: 5, alarm: 20 } }
    newOil: { tbn: 10, tan: 1, v40: 220, v100: 14, oxidation: 5 }
    cleanliness: { target: "18/16/13" }
`),
    { unit: 'F-1', component: 'gearbox', group: 'fuzz' },
  ),
};

/** One component's accepted samples: events forced onto one unit/component, whatever was refused dropped. */
const componentSamples = fc.array(nearEvent, { minLength: 10, maxLength: 40, size: '+1' }).map((events) =>
  events.flatMap((e) => {
    const parsed = parseResultEvent({ ...e, unit: 'F-1', component: 'gearbox', group: 'fuzz' });
    return parsed.ok ? [parsed.sample] : [];
  }),
);

/** Wear-like series with the extremes of accepted input: huge hours, zero intervals, oil changes, censoring. */
const wearSeries = fc
  .array(
    fc.record({
      days: fc.oneof(fc.integer({ min: 0, max: 40 }), fc.constant(0)),
      hours: fc.oneof(fc.integer({ min: 0, max: 400 }), fc.constantFrom(0, 1e7)),
      Fe: fc.oneof(fc.double({ min: 0, max: 300, noNaN: true }), fc.constantFrom(0, 1e6, '<1', '>500')),
      Cu: fc.oneof(fc.double({ min: 0, max: 50, noNaN: true }), fc.constant('<1')),
      oilChanged: fc.nat(7).map((n) => n === 0),
      componentChanged: fc.nat(20).map((n) => n === 0),
      topUpLitres: fc.oneof(fc.constant(0), fc.double({ min: 0, max: 1e6, noNaN: true })),
      revision: fc.nat(2),
    }),
    { maxLength: 60 },
  )
  .map((rows) => {
    let t = Date.parse('2025-01-01T00:00:00Z');
    let oil = 0;
    let unit = 0;
    return rows.flatMap((r, i) => {
      t += r.days * 86_400_000;
      oil = r.oilChanged ? 0 : Math.min(1e7, oil + r.hours);
      unit = Math.min(1e7, unit + r.hours);
      const parsed = parseResultEvent({
        sampleId: `W-${Math.floor(i / (r.revision + 1))}`,
        revision: r.revision,
        unit: 'F-1',
        component: 'gearbox',
        group: 'fuzz',
        sampledAt: new Date(t).toISOString(),
        unitHours: unit,
        oilHours: oil,
        oilChanged: r.oilChanged,
        componentChanged: r.componentChanged,
        topUpLitres: r.topUpLitres,
        readings: { Fe: r.Fe, Cu: r.Cu },
      });
      return parsed.ok ? [parsed.sample] : [];
    });
  });

let digested = 0;

function digestsWithoutHarm(samples: Sample[]): void {
  digested += samples.length;
  const history = buildHistory(samples);
  expect(history.samples.length).toBe(new Set(samples.map((s) => s.sampleId)).size);
  for (const settings of Object.values(CONFIGS)) {
    const evaluation = evaluateComponent(samples, settings);
    expect(evaluation.steps.length).toBe(history.samples.length);
    for (const step of evaluation.steps) {
      for (const f of step.findings) {
        expect(SEVERITIES).toContain(f.severity);
        expect(Number.isFinite(f.value), `${f.rule} ${f.measurand} value ${f.value}: ${JSON.stringify(f)}`).toBe(true);
        if (f.threshold !== undefined) expect(Number.isFinite(f.threshold), `${f.rule} ${f.measurand} threshold ${f.threshold}`).toBe(true);
        expect(f.explanation.trim()).not.toBe('');
        expect(f.explanation).not.toMatch(/NaN|undefined|Infinity/);
      }
    }
  }
}

describe('series builder and evaluation under fuzzing', () => {
  it('digest any accepted events of one component', () => {
    digested = 0;
    fc.assert(fc.property(componentSamples, digestsWithoutHarm), { numRuns: 150 });
    expect(digested).toBeGreaterThan(200);
  });

  it('digest wear-like series with extreme but accepted values', () => {
    fc.assert(fc.property(wearSeries, digestsWithoutHarm), { numRuns: 150 });
  });

  it('give no infinite wear rate for an interval of a vanishing number of hours', () => {
    // Both events pass the schema (hours are finite and not negative); the second interval is 5e-324 h.
    const events = [
      { sampleId: 'T-1', oilHours: 0, readings: { Fe: 5 } },
      { sampleId: 'T-2', oilHours: 5e-324, readings: { Fe: 15 } },
    ].map((e, i) => parseResultEvent({ unit: 'F-1', component: 'gearbox', group: 'fuzz', sampledAt: new Date(Date.UTC(2026, 0, 1 + i)).toISOString(), ...e }));
    const samples = events.map((p) => (p.ok ? p.sample : undefined)).filter((s): s is Sample => s !== undefined);
    expect(samples).toHaveLength(2);
    digestsWithoutHarm(samples);
  });
});
