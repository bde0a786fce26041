/**
 * Smoke test of the `quiet` benchmark part on a tiny fleet, so that the bench code does not rot: the invented fleets
 * are what the module says (censored readings, steady contaminants, a wear change only where planned), each injected
 * fault is the fault it names, and the part reports every figure its targets are judged on. The figures themselves
 * belong to BENCHMARKS.md (invented data, `npm run bench -- --only quiet`).
 */
import { describe, expect, it } from 'vitest';
import { FAULT_KINDS, injectFault, runQuiet } from '../../bench/quiet.ts';
import { ENGINES, GEARBOXES, simulateUnit } from '../../bench/quietFleet.ts';
import { parseResultEvent } from '../../src/domain/event.ts';
import { seededRandom } from '../../src/simulation/random.ts';

const plan = (kind = ENGINES, index = 0) => ({ kind, fleetSeed: 7, index, group: `${kind.component}-group`, samples: 60 });

describe('quiet bench fleets', () => {
  it('invented engines: valid events, lead near its detection limit reported censored, silicon steady', () => {
    const u = simulateUnit(plan());
    for (const e of u.events) expect(parseResultEvent(e).ok).toBe(true);
    const pb = u.events.map((e) => e.readings.Pb);
    expect(pb.some((r) => r === '<1')).toBe(true);
    const si = u.events.map((e) => e.readings.Si).filter((r): r is number => typeof r === 'number');
    expect(Math.max(...si) - Math.min(...si)).toBeLessThan(8);
    expect(u.events.filter((e) => e.oilChanged).length).toBeGreaterThan(20);
  });

  it('a wear change alters only the planned metal, after its start, with the twin\'s sampling times', () => {
    const twin = simulateUnit(plan(GEARBOXES, 3));
    const atHours = twin.hours[20]!;
    const stepped = simulateUnit({ ...plan(GEARBOXES, 3), change: { measurand: 'Fe', shape: 'step', factor: 2, atHours } });
    expect(stepped.hours).toEqual(twin.hours);
    expect(stepped.events.slice(0, 21).map((e) => e.readings)).toEqual(twin.events.slice(0, 21).map((e) => e.readings));
    expect(stepped.trueLevels[40]!.Fe!).toBeGreaterThan(twin.trueLevels[40]!.Fe!);
    expect(stepped.trueLevels[40]!.Cu).toBe(twin.trueLevels[40]!.Cu);
  });

  it('each injected fault is the fault it names, at a sample that continues a charge', () => {
    const u = simulateUnit(plan());
    const donor = simulateUnit(plan(GEARBOXES, 1));
    for (const kind of FAULT_KINDS) {
      const { events, fault } = injectFault(u, kind, donor, seededRandom(3));
      const k = events.findIndex((e) => e.sampleId === fault.sampleId);
      const [e, prev, orig] = [events[k]!, events[k - 1]!, u.events[k]!];
      expect(e.oilChanged, kind).toBe(false);
      const changed = Object.keys(e).filter((f) => JSON.stringify(e[f as keyof typeof e]) !== JSON.stringify(orig[f as keyof typeof orig]));
      if (kind === 'oil-hours-back') expect(e.oilHours!).toBeLessThan(prev.oilHours!);
      else if (kind === 'unit-hours-back') expect(e.unitHours!).toBeLessThan(prev.unitHours!);
      else expect(changed, kind).toEqual(['readings']);
      if (kind === 'duplicate-bottle') expect(e.readings).toEqual(prev.readings);
      if (kind === 'reading-drop') expect(e.readings.Fe as number).toBeLessThan(0.5 * u.trueLevels[k]!.Fe!);
      if (kind === 'other-unit-other-oil') expect(e.readings.B).toBeDefined();
      if (kind === 'new-oil-bottle') expect(e.readings.Fe === '<1' || (e.readings.Fe as number) < 5).toBe(true);
    }
  });
});

describe('quiet bench part', () => {
  it('reports healthy incidents per family, delays after wear changes and fault outcomes on a tiny fleet', async () => {
    const r = await runQuiet({ componentsPerKind: 9, samples: 70, groupSize: 9, seed: 2 });
    const j = r.json as {
      healthy: { per100ComponentYears: { all: number; machine: number; sampling: number }; byFamily: Record<string, number> };
      changes: { n: number }[];
      faults: Record<string, { n: number; flagged: number; wear: number }>;
      targets: Record<string, { met: boolean }>;
      ceiling: { doublingsWithin5: Record<'oneMetal' | 'shared' | 'sharedRateLearnt', number>; step15Within15: Record<'oneMetal' | 'shared' | 'sharedRateLearnt', number> };
    };
    expect(j.healthy.per100ComponentYears.all).toBeCloseTo(j.healthy.per100ComponentYears.machine + j.healthy.per100ComponentYears.sampling, 2);
    expect(Object.keys(j.healthy.byFamily).sort()).toEqual(['cleanliness', 'condition', 'cusum', 'ewma', 'limit', 'population', 'rate', 'sampling']);
    expect(j.changes.reduce((s, c) => s + c.n, 0)).toBe(6);
    const faults = Object.values(j.faults);
    expect(faults.reduce((s, f) => s + f.n, 0)).toBe(6);
    for (const f of faults) expect(f.flagged).toBeLessThanOrEqual(f.n);
    expect(Object.keys(j.targets)).toHaveLength(6);
    // The oracle's bound: a probability; the more generous false-alarm allowance never gives less, nor does being told the rate.
    for (const b of [j.ceiling.doublingsWithin5, j.ceiling.step15Within15]) {
      expect(b.sharedRateLearnt).toBeGreaterThan(0);
      expect(b.oneMetal).toBeLessThanOrEqual(1);
      expect(b.oneMetal).toBeGreaterThanOrEqual(b.shared);
      expect(b.shared).toBeGreaterThanOrEqual(b.sharedRateLearnt);
    }
  }, 600_000);

  it('pools several fleets, each measured as it would be alone', async () => {
    const alone = (await runQuiet({ componentsPerKind: 9, samples: 70, groupSize: 9, seed: 2 })).json as { targets: Record<string, { value: number }>; changes: { n: number }[] };
    const pooled = (await runQuiet({ componentsPerKind: 9, samples: 70, groupSize: 9, seed: 2, fleets: 2 })).json as {
      fleets: number[];
      changes: { n: number }[];
      byFleet: { seed: number; healthyAll: number; doublingWithin5: number; step15Within15: number; faultsFlagged: number; faultsOpeningWearIncident: number }[];
    };
    expect(pooled.fleets).toEqual([2, 3]);
    expect(pooled.byFleet.map((f) => f.seed)).toEqual([2, 3]);
    expect(pooled.changes.reduce((s, c) => s + c.n, 0)).toBe(2 * alone.changes.reduce((s, c) => s + c.n, 0));
    // Fleets have groups of their own: the first fleet's figures are those it gives alone.
    const first = pooled.byFleet[0]!;
    expect(first.healthyAll).toBeCloseTo(alone.targets.healthyAllFamilies!.value, 1);
    expect(first.doublingWithin5).toBeCloseTo(alone.targets.doublingWithin5!.value, 3);
    expect(first.step15Within15).toBeCloseTo(alone.targets.step15Within15!.value, 3);
    expect(first.faultsFlagged).toBeCloseTo(alone.targets.faultsFlagged!.value, 3);
    expect(first.faultsOpeningWearIncident).toBeCloseTo(alone.targets.faultsOpeningWearIncident!.value, 3);
  }, 600_000);
});
