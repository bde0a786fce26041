/**
 * The backtest predicts what production does when the results of a history come in as they are sampled: every result
 * arrives live, so its incidents depend on the data only — not on the processing time (--now) nor on
 * backfill.quietAfterDays, which decide only what an import of old results now keeps quiet (replay's default). And
 * its rates per 100 component-years need an exposure to be taken over.
 *
 * The history: one gearbox sampled every 14 days, water far below its caution level but for two samples 7 samples
 * apart. Arriving live, the first excursion opens an incident, two clean samples return it to normal (unacknowledged,
 * so it stays open: returnAfterSamples 2), and the second excursion makes it active again — one incident. Imported
 * long after, every sample is quiet backfill: the incident, never announced, closes on its return to normal, and the
 * second excursion, more than reopenWithinSamples (3) clean samples later, opens a second one.
 */
import { describe, expect, it } from 'vitest';
import { backtest } from '../../src/backtest/backtest.ts';
import { MIN_COMPONENT_YEARS } from '../../src/backtest/summary.ts';
import { ADVISORY_CAUTION } from '../../src/domain/caution.ts';
import { parseConfig } from '../../src/domain/configFile.ts';
import { RULE_FAMILIES } from '../../src/domain/finding.ts';
import { replayRecords } from '../../src/pipeline/replay.ts';

const DAY = 86_400_000;
const YEAR = 365.25 * DAY;
const T0 = Date.parse('2025-01-06T08:00:00Z');

/** `water` ppm per sample, every `everyMs` from T0. */
function history(water: readonly number[], everyMs = 14 * DAY) {
  return water.map((w, i) => ({
    line: i + 1,
    record: {
      sampleId: `S${String(i).padStart(2, '0')}`,
      unit: 'U1',
      component: 'gearbox',
      sampledAt: new Date(T0 + i * everyMs).toISOString(),
      unitHours: 1000 + 250 * i,
      oilHours: 250 * (i + 1),
      readings: { Fe: 20, water: w },
    },
  }));
}

function configWith(quietAfterDays: number) {
  return parseConfig(`
detection: { measurands: [] }
population: { measurands: [] }
backfill: { quietAfterDays: ${quietAfterDays} }
defaults:
  limits: { water: { caution: 500, alarm: 1000 } }
`);
}

// 30 samples 14 days apart: 406 days, 1.11 component-years.
const WATER = Array.from({ length: 30 }, (_, i) => (i === 3 || i === 10 ? 800 : 100));
const RECORDS = history(WATER);
const LAST = T0 + 29 * 14 * DAY;

async function runOf(quietAfterDays: number, now: number) {
  const result = await backtest(RECORDS, { file: 'h.jsonl', configurations: [{ label: 'c', configFile: null, config: configWith(quietAfterDays) }], now });
  return result.summary;
}

describe('backtest: every result arrives live, at its sampling time', () => {
  it('gives the same incidents whatever the processing time and backfill.quietAfterDays', async () => {
    const soon = await runOf(100_000, LAST + DAY);
    expect(soon.runs[0]!.episodes.map((e) => [e.incidentId, e.state])).toEqual([['U1/gearbox@S03', 'returned to normal, unacknowledged']]);
    // The default backfill rule, the history long past: not one result would be quiet backfill in a backtest.
    for (const [quiet, now] of [
      [30, LAST + DAY],
      [30, LAST + 10 * YEAR],
      [100_000, LAST + 10 * YEAR],
    ] as const) {
      expect((await runOf(quiet, now)).runs, `quietAfterDays ${quiet}, now ${new Date(now).toISOString()}`).toEqual(soon.runs);
    }
  });

  it('keeps the incident open across its return to normal, as live operation does, and counts its second annunciation', async () => {
    const run = (await runOf(30, LAST + 10 * YEAR)).runs[0]!;
    expect(run.incidents.total).toBe(1);
    // An annunciation is an incident opening or becoming active again (ISA-18.2 / IEC 62682 "annunciation", from memory).
    expect(run.alarmFigures.annunciations).toBe(2);
    expect(run.alarmFigures.quiet).toBe(0);
    expect(run.episodes[0]!.state).not.toMatch(/^closed/);
  });

  it('while replay, which imports the file now, keeps old results quiet: the incident closes unannounced and the second excursion opens another', async () => {
    const config = configWith(30);
    const outcome = await replayRecords(RECORDS, { config, now: LAST + 10 * YEAR });
    const incidents = outcome.store.incidents().filter((i) => i.closed?.how !== 'withdrawn');
    expect(incidents.map((i) => [i.id, i.closed?.how ?? null]).sort()).toEqual([
      ['U1/gearbox@S03', 'returned-unannounced'],
      ['U1/gearbox@S10', 'returned-unannounced'],
    ]);
    expect(outcome.timeline.filter((l) => l.type === 'finding').every((l) => l.type === 'finding' && l.quiet)).toBe(true);
    // The same file arriving as sampled: no finding is quiet, one incident.
    const live = await replayRecords(RECORDS, { config, now: LAST + 10 * YEAR, arrival: 'sampled' });
    expect(live.timeline.filter((l) => l.type === 'finding').some((l) => l.type === 'finding' && l.quiet)).toBe(false);
    expect(live.store.incidents().map((i) => i.id)).toEqual(['U1/gearbox@S03']);
  });

  it('still rejects a sample dated after the processing time as lying in the future', async () => {
    const rejected: number[] = [];
    const result = await backtest(RECORDS, {
      file: 'h.jsonl',
      configurations: [{ label: 'c', configFile: null, config: configWith(30) }],
      now: T0 + 20 * 14 * DAY,
      onRejected: (r) => rejected.push(r.line),
    });
    // Samples 21..29 lie more than a day after the processing time (lines 22..30).
    expect(rejected).toEqual(Array.from({ length: 9 }, (_, i) => 22 + i));
    expect(result.summary.rejected).toBe(9);
  });
});

describe('backtest: rates per 100 component-years need an exposure', () => {
  it('gives no rate for two samples two hours apart, but the incidents and the exposure they were counted over', async () => {
    const records = history([800, 1200], 2 * 3_600_000);
    const result = await backtest(records, { file: 'two.jsonl', configurations: [{ label: 'c', configFile: null, config: configWith(30) }], now: T0 + DAY });
    const run = result.summary.runs[0]!;
    expect(run.incidents.total).toBe(1);
    expect(run.incidents.per100ComponentYears).toBeNull();
    // Exposure: each component from its first to its last sample (2 h here), in years of 365.25 days.
    expect(run.incidents.componentYears).toBeCloseTo((2 * 3_600_000) / YEAR, 4);
    expect(run.incidents.minComponentYears).toBe(MIN_COMPONENT_YEARS);
    for (const f of RULE_FAMILIES) expect(run.incidents.byFamily[f].per100ComponentYears, f).toBeNull();
    expect(run.alarmFigures.per100ComponentYears).toBeNull();
    expect(run.alarmFigures.incidents).toBe(1);
  });

  it('counts a component with a single sample as no exposure, though its incident counts', async () => {
    const result = await backtest(history([800]), { file: 'one.jsonl', configurations: [{ label: 'c', configFile: null, config: configWith(30) }], now: T0 + DAY });
    const run = result.summary.runs[0]!;
    expect([run.incidents.total, run.incidents.componentYears, run.incidents.per100ComponentYears]).toEqual([1, 0, null]);
  });

  it('gives the rate once the exposure reaches the minimum', async () => {
    const summary = await runOf(30, LAST + DAY);
    const years = (LAST - T0) / YEAR;
    expect(years).toBeGreaterThanOrEqual(MIN_COMPONENT_YEARS);
    // Each component's span is rounded to 4 decimals of a year before the rate is taken.
    expect(summary.runs[0]!.incidents.per100ComponentYears).toBeCloseTo(100 / years, 1);
  });
});

describe('backtest summary: the caution', () => {
  it('carries the caution that goes with every finding, in the JSON the page embeds', async () => {
    expect((await runOf(30, LAST + DAY)).advisory).toBe(ADVISORY_CAUTION);
  });
});
