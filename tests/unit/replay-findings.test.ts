/**
 * Replay lists each finding once, as the last judgement of its sample gives it, whatever the order of the file. A
 * sample is judged again when a result sampled before it arrives later (another unit's changes the group statistics
 * of its month), so a file ordered unit by unit re-judges many samples: their finding lines are those of the last
 * judgement — the findings a time-ordered file gives and the store keeps — and a finding an earlier judgement gave
 * otherwise is marked `revised`. A finding only an earlier judgement gave is not listed.
 *
 * Invented histories: gearboxes of one group sampled monthly with iron near 20 ppm, population limits on Fe from 4
 * results of the other units sampled before the month.
 */
import { describe, expect, it } from 'vitest';
import { parseConfig } from '../../src/domain/configFile.ts';
import { findingKey } from '../../src/domain/finding.ts';
import { replayRecords, type FindingLine, type ReplayOutcome } from '../../src/pipeline/replay.ts';
import { inventedFleet } from '../helpers/fleetCsv.ts';

const CONFIG = parseConfig(`
detection: { measurands: [] }
population: { measurands: [Fe], minResults: 4, bandHours: [0], peers: { enabled: false } }
`);

const NOW = Date.parse('2026-01-01T00:00:00Z');

interface Rec {
  sampleId: string;
  unit: string;
  component: string;
  sampledAt: string;
  unitHours: number;
  oilHours: number;
  readings: Record<string, number>;
}

/** Monthly samples of one gearbox from January 2025 (the 10th, 08:00 plus an hour per unit), one Fe value each. */
function unitHistory(unit: string, offsetHours: number, fe: readonly number[]): Rec[] {
  return fe.map((value, i) => ({
    sampleId: `${unit}-${i + 1}`,
    unit,
    component: 'gearbox',
    sampledAt: new Date(Date.UTC(2025, i, 10, 8 + offsetHours)).toISOString(),
    unitHours: 1000 + 300 * i,
    oilHours: 300 * (i + 1),
    readings: { Fe: value },
  }));
}

const byTime = (rs: readonly Rec[]) => [...rs].sort((a, b) => Date.parse(a.sampledAt) - Date.parse(b.sampledAt));

function replay(rs: readonly Rec[]): Promise<ReplayOutcome> {
  return replayRecords(
    rs.map((record, i) => ({ line: i + 1, record })),
    { config: CONFIG, now: NOW },
  );
}

const findingLines = (o: ReplayOutcome) => o.timeline.filter((l): l is FindingLine => l.type === 'finding');
const identity = (f: FindingLine) => JSON.stringify([f.unit, f.component, f.sampleId, findingKey(f)]);
/** A finding line's content without the mark, as a time-ordered file prints it. */
const content = ({ revised: _r, ...f }: FindingLine) => JSON.stringify(f);

function expectEachOnce(lines: readonly FindingLine[]) {
  const ids = lines.map(identity);
  expect(ids.length).toBeGreaterThan(0);
  expect(new Set(ids).size).toBe(ids.length);
}

describe('replay findings', () => {
  it('a fleet ordered unit by unit: each finding once, the same as in time order, in sample-time order', async () => {
    const fleet = inventedFleet({ units: 5, samplesPerUnit: 24, seed: 7 }) as unknown as Rec[];
    // Units interleaved out of time order: the last unit first, then the others, each unit's results in a block.
    const units = [...new Set(fleet.map((r) => r.unit))];
    const order = [units.at(-1)!, ...units.slice(0, -1)];
    const interleaved = order.flatMap((u) => fleet.filter((r) => r.unit === u));
    expect(interleaved).not.toEqual(byTime(interleaved));

    const [timeOrdered, unitOrdered] = [await replay(byTime(fleet)), await replay(interleaved)];
    const inTime = findingLines(timeOrdered);
    const inUnits = findingLines(unitOrdered);
    expectEachOnce(inTime);
    expectEachOnce(inUnits);
    expect(inUnits.map(content).sort()).toEqual(inTime.map(content).sort());
    // In time order nothing is judged twice; the unit-ordered file re-judges samples as the other units' results come.
    expect(inTime.filter((f) => f.revised)).toEqual([]);
    expect(inUnits.some((f) => f.revised)).toBe(true);

    // What the store keeps as the verdict stands (the findings the live worker keeps).
    const kept = [];
    for (const c of await unitOrdered.store.components()) for (const s of await unitOrdered.store.findings(c)) kept.push(...s.findings);
    expect(inUnits.map(({ type: _t, quiet: _q, revised: _r, ...f }) => JSON.stringify(f)).sort()).toEqual(kept.map((f) => JSON.stringify(f)).sort());

    const times = inUnits.map((f) => Date.parse(f.sampledAt));
    expect(times).toEqual([...times].sort((a, b) => a - b));
  });

  it('a finding a later judgement gives is listed once, marked revised', async () => {
    const steady = [19, 21, 20, 22, 18, 20];
    const others = [unitHistory('U1', 0, steady), unitHistory('U2', 1, [20, 22, 19, 21, 20, 21]), unitHistory('U3', 2, [21, 19, 20, 18, 22, 20])];
    // U4's June sample is far above the others: judged first with no group statistics (nothing to compare with),
    // then against each unit's results as they come, its level moving each time.
    const u4 = unitHistory('U4', 3, [20, 21, 19, 20, 21, 60]);
    const timeOrdered = findingLines(await replay(byTime([...others.flat(), ...u4])));
    const unitOrdered = findingLines(await replay([...u4, ...others.flat()]));
    expectEachOnce(unitOrdered);
    const june = (lines: FindingLine[]) => lines.filter((f) => f.sampleId === 'U4-6' && f.rule === 'population');
    expect(june(unitOrdered)).toHaveLength(1);
    expect(june(unitOrdered)[0]).toMatchObject({ measurand: 'Fe', severity: 'alarm', revised: true });
    expect(june(timeOrdered)).toHaveLength(1);
    expect(june(timeOrdered)[0]!.revised).toBeUndefined();
    expect(content(june(unitOrdered)[0]!)).toBe(content(june(timeOrdered)[0]!));
    expect(unitOrdered.map(content).sort()).toEqual(timeOrdered.map(content).sort());
  });

  it('a finding only an earlier judgement gave is not listed', async () => {
    // U4 arrives after U1 alone: against U1's steady iron its June 60 ppm is an alarm. Then U2 and U3, whose iron
    // runs high and scattered, widen the group's spread until 60 ppm is below the caution level.
    const u1 = unitHistory('U1', 0, [19, 21, 20, 22, 18, 20]);
    const u4 = unitHistory('U4', 3, [20, 21, 19, 20, 21, 60]);
    const high = [unitHistory('U2', 1, [60, 95, 40, 90, 55, 70]), unitHistory('U3', 2, [85, 45, 100, 50, 80, 65])];
    const timeOrdered = findingLines(await replay(byTime([...u1, ...u4, ...high.flat()])));
    const early = findingLines(await replay([...u1, ...u4]));
    const unitOrdered = findingLines(await replay([...u1, ...u4, ...high.flat()]));
    // The earlier judgement did give it.
    expect(early.filter((f) => f.sampleId === 'U4-6' && f.rule === 'population')).toHaveLength(1);
    expect(unitOrdered.filter((f) => f.sampleId === 'U4-6')).toEqual([]);
    expect(timeOrdered.filter((f) => f.sampleId === 'U4-6')).toEqual([]);
    expectEachOnce(unitOrdered);
    expect(unitOrdered.map(content).sort()).toEqual(timeOrdered.map(content).sort());
  });
});
