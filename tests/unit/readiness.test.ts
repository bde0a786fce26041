/**
 * What the analysis says it cannot judge yet (src/analysis/readiness.ts), as the board, the series API and replay
 * show it: it claims no rule judges a measurand the samples lack what that rule needs for (oil hours for the
 * population bands, a new-oil value for TBN, TAN and viscosity, a cleanliness target for the ISO 4406 code), it
 * leaves out measurands the lab never reported, and
 * it counts the peers a comparison can be made with. Invented samples with exact readings.
 */
import { describe, expect, it } from 'vitest';
import { evaluateComponent } from '../../src/analysis/evaluate.ts';
import type { GroupStats } from '../../src/analysis/model.ts';
import { notJudgedYet, readinessOf, sharedReadinessLines } from '../../src/analysis/readiness.ts';
import { parseConfig } from '../../src/domain/configFile.ts';
import { parseResultEvent, type Sample } from '../../src/domain/event.ts';
import { resolveSettings } from '../../src/domain/settings.ts';

function samplesOf(n: number, fields: (i: number) => Record<string, unknown>): Sample[] {
  return Array.from({ length: n }, (_, i) => {
    const parsed = parseResultEvent({
      sampleId: `S${String(i).padStart(2, '0')}`,
      unit: 'GB-1',
      component: 'gearbox',
      sampledAt: new Date(Date.UTC(2025, 0, 1) + i * 250 * 3_600_000).toISOString(),
      unitHours: 10_000 + i * 250,
      ...fields(i),
    });
    if (!parsed.ok) throw new Error(JSON.stringify(parsed.issues));
    return parsed.sample;
  });
}

function readiness(configText: string, samples: readonly Sample[], group?: GroupStats, others?: number) {
  const settings = resolveSettings(parseConfig(configText), samples[0]!);
  const ev = evaluateComponent(samples, settings, group);
  const rows = readinessOf(ev.state, settings, group, ev.history.samples, others);
  return { rows, of: (m: string) => rows.find((r) => r.measurand === m) };
}

/** A group whose bands are full (40 results in every band) for the given measurands. */
function fullBands(measurands: readonly string[]): GroupStats['bands'] {
  const bands = [0, 250, 500, 1000].map((from, i, all) => ({ fromHours: from, toHours: all[i + 1] ?? null, n: 40, mean: 10, sd: 2 }));
  return Object.fromEntries(measurands.map((m) => [m, bands]));
}

describe('readiness', () => {
  it('leaves out measurands the samples never carried: no line for every metal a lab does not report', () => {
    const samples = samplesOf(20, (i) => ({ oilHours: 250 + (i % 4) * 250, oilChanged: i > 0 && i % 4 === 0, readings: { Fe: 5 + (i % 4) * 4, Si: 4 } }));
    const { rows } = readiness('', samples, { group: 'gearbox', bands: fullBands(['Fe', 'Si']), baselines: {} });
    expect(rows.map((r) => r.measurand)).toEqual(['Fe', 'Si']);
    expect(rows.map((r) => r.summary).join(' ')).not.toMatch(/\b(Ag|Cu|Ni|pq):/);
  });

  it('says population limits need oil hours when the latest sample has none, instead of "judged by every rule"', () => {
    const samples = samplesOf(20, () => ({ readings: { Fe: 5, Si: 4 } }));
    const { of } = readiness('', samples, { group: 'gearbox', bands: fullBands(['Fe', 'Si']), baselines: {} });
    expect(of('Si')!.needs).toEqual(['oil hours']);
    expect(of('Si')!.summary).toBe('Si: population limits need oil hours (the latest sample has none).');
    expect(of('Si')!.summary).not.toContain('judged by every rule');
    expect(notJudgedYet(of('Si')!)).toBe(true);
    expect(of('Fe')!.needs).toEqual(['oil hours']);
  });

  it('with oil hours and full bands, says the measurand is judged by the rules that apply to it', () => {
    const samples = samplesOf(20, (i) => ({ oilHours: 250 + (i % 4) * 250, oilChanged: i > 0 && i % 4 === 0, readings: { Si: 4 } }));
    const { of } = readiness('', samples, { group: 'gearbox', bands: fullBands(['Si']), baselines: {} });
    expect(of('Si')!.summary).toBe('Si: judged by every rule that applies to it.');
    expect(of('Si')!.needs).toBeUndefined();
    expect(notJudgedYet(of('Si')!)).toBe(false);
  });

  it('on the first day, without group statistics, counts the band as empty rather than leaving it unsaid', () => {
    const samples = samplesOf(1, () => ({ oilHours: 300, readings: { Si: 4 } }));
    const { of } = readiness('', samples, undefined);
    expect(of('Si')!.band).toEqual({ name: '250–500 h', have: 0, need: 30 });
    expect(of('Si')!.summary).toBe('Si: population limits: band 250–500 h 0 of 30 results.');
  });

  it('says TBN, TAN and viscosity need a new-oil value, which the condition rule judges them against', () => {
    const samples = samplesOf(3, () => ({ oilHours: 300, readings: { tbn: 1.5, tan: 7, v100: 8.5 } }));
    const bare = readiness('', samples);
    for (const m of ['tbn', 'tan', 'v100']) {
      expect(bare.of(m)!.needs).toEqual(['new-oil value']);
      expect(bare.of(m)!.summary).toBe(`${m}: not judged: needs a new-oil value (set newOil.${m} for group gearbox, or under defaults).`);
    }
    // v40 was never measured: no line.
    expect(bare.of('v40')).toBeUndefined();
    // Far beyond any default level, and yet no finding: the rule has nothing to compare with.
    const settings = resolveSettings(parseConfig(''), samples[0]!);
    expect(evaluateComponent(samples, settings).steps.flatMap((s) => s.findings).filter((f) => f.rule === 'condition')).toEqual([]);

    const withNewOil = readiness('defaults:\n  newOil: { tbn: 10, tan: 0, v100: 14 }\n', samples);
    for (const m of ['tbn', 'tan', 'v100']) {
      expect(withNewOil.of(m)!.needs).toBeUndefined();
      expect(withNewOil.of(m)!.summary).toBe(`${m}: judged by every rule that applies to it.`);
    }
  });

  it('says the ISO 4406 code needs a cleanliness target, which the cleanliness rule judges it against', () => {
    // Three steps worse than any usual target, and yet no finding without one: the rule has nothing to compare with.
    const samples = samplesOf(3, () => ({ oilHours: 300, readings: { iso4406: '22/20/17' } }));
    const bare = readiness('', samples);
    expect(bare.of('iso4406')!.needs).toEqual(['cleanliness target']);
    expect(bare.of('iso4406')!.summary).toBe('iso4406: not judged: needs a cleanliness target (set cleanliness.target for group gearbox, or under defaults).');
    expect(notJudgedYet(bare.of('iso4406')!)).toBe(true);
    const settings = resolveSettings(parseConfig(''), samples[0]!);
    expect(evaluateComponent(samples, settings).steps.flatMap((s) => s.findings).filter((f) => f.rule === 'cleanliness')).toEqual([]);

    for (const config of ['defaults:\n  cleanliness: { target: 17/15/12 }\n', 'groups:\n  - name: gearbox\n    match: { component: gearbox }\n    cleanliness: { target: 17/15/12 }\n']) {
      const withTarget = readiness(config, samples);
      expect(withTarget.of('iso4406')!.needs).toBeUndefined();
      expect(withTarget.of('iso4406')!.summary).toBe('iso4406: judged by every rule that applies to it.');
      expect(notJudgedYet(withTarget.of('iso4406')!)).toBe(false);
    }
  });

  it('counts an ISO 4406 code worked out from the particle counts as carried, and leaves it out without code or counts', () => {
    const counts = samplesOf(2, () => ({ oilHours: 300, readings: { p4: 2000, p6: 600, p14: 70 } }));
    const fromCounts = readiness('', counts);
    expect(fromCounts.of('iso4406')!.needs).toEqual(['cleanliness target']);
    expect(fromCounts.of('iso4406')!.summary).toContain('needs a cleanliness target');
    // p14 missing: no code can be worked out, and nothing is said of one.
    const partial = readiness('', samplesOf(2, () => ({ oilHours: 300, readings: { p6: 600 } })));
    expect(partial.of('iso4406')).toBeUndefined();
    const none = readiness('', samplesOf(2, () => ({ oilHours: 300, readings: { Fe: 5 } })));
    expect(none.of('iso4406')).toBeUndefined();
  });

  it('counts the peers with a baseline, and says when too few of them wear measurably to compare with', () => {
    // Nickel stays at 0 ppm: the group's six other gearboxes all have a complete baseline with a rate of zero, so
    // none enters the comparison (made on log rates), however long one waits.
    const samples = samplesOf(20, (i) => ({ oilHours: 250 + (i % 4) * 250, oilChanged: i > 0 && i % 4 === 0, readings: { Ni: 0, Fe: 5 + (i % 4) * 4 } }));
    const zero = { rate: 0, processVariance: 0.01, rateVariance: 0, intervals: 72, components: 6 };
    const { of } = readiness('', samples, { group: 'gearbox', bands: fullBands(['Ni', 'Fe']), baselines: { Ni: zero } });
    const ni = of('Ni')!;
    expect(ni.peers).toEqual({ have: 5, need: 5, measurable: 0 });
    expect(ni.summary).toContain('comparison with peers: 0 of the 6 other components with a baseline wear measurably (rate above zero), it needs 5');
    expect(ni.summary).not.toContain('comparison with peers 0 of 5 components');

    const fe = of('Fe')!;
    expect(fe.peers).toEqual({ have: 0, need: 5, measurable: 0 });
    expect(fe.summary).toContain('comparison with peers 0 of 5 components');
  });

  it('says when the group holds too few other components ever to reach the group baseline or the comparison with peers', () => {
    const samples = samplesOf(3, (i) => ({ oilHours: 250 * (i + 1), readings: { Fe: 5 + i * 4 } }));
    // A group of four gearboxes: three others, the comparison needs five with a complete own baseline.
    const small = readiness('', samples, undefined, 3).of('Fe')!;
    expect(small.peers).toEqual({ have: 0, need: 5, measurable: 0, others: 3 });
    expect(small.summary).toContain('comparison with peers: not made, group gearbox holds only 3 other components so far and it needs 5 with a complete own baseline');
    expect(small.summary).not.toContain('comparison with peers 0 of 5 components');
    // Enough others, none with a baseline yet: the count of those with one, as before.
    const large = readiness('', samples, undefined, 8).of('Fe')!;
    expect(large.summary).toContain('comparison with peers 0 of 5 components');
    expect(large.summary).not.toContain('holds');
    // Alone in its group: the group baseline can never form either, and the line says why.
    const alone = readiness('', samples, undefined, 0).of('Fe')!;
    expect(alone.summary).toContain('group baseline 0 of 2 components (group gearbox holds no other components so far)');
    const one = readiness('', samples, undefined, 1).of('Fe')!;
    expect(one.summary).toContain('group baseline 0 of 2 components (group gearbox holds only 1 other component so far)');
    // Unknown (a caller that does not count): the lines of before.
    expect(readiness('', samples).of('Fe')!.summary).toContain('group baseline 0 of 2 components;');
  });

  it('merges the lines of measurands that say the same, in the order of the first', () => {
    const rows = [
      { measurand: 'Fe', summary: 'Fe: change detection against its own baseline; comparison with peers: not made.' },
      { measurand: 'tbn', summary: 'tbn: judged by every rule that applies to it.' },
      { measurand: 'Cu', summary: 'Cu: change detection against its own baseline; comparison with peers: not made.' },
      { measurand: 'v100', summary: 'v100: judged by every rule that applies to it.' },
      { measurand: 'Al', summary: 'Al: change detection waits: own baseline 3 of 12 intervals.' },
    ] as const;
    expect(sharedReadinessLines(rows)).toEqual([
      'Fe, Cu: change detection against its own baseline; comparison with peers: not made.',
      'tbn, v100: judged by every rule that applies to it.',
      'Al: change detection waits: own baseline 3 of 12 intervals.',
    ]);
  });

  it('says change detection has no wear rate at a sample with neither oil nor unit hours', () => {
    const parsed = parseResultEvent({ sampleId: 'S00', unit: 'GB-1', component: 'gearbox', sampledAt: '2025-01-01T00:00:00Z', readings: { Fe: 5 } });
    if (!parsed.ok) throw new Error(JSON.stringify(parsed.issues));
    const { of } = readiness('', [parsed.sample]);
    expect(of('Fe')!.needs).toEqual(['oil or unit hours', 'oil hours']);
    expect(of('Fe')!.summary).toContain('no wear rate at the latest sample: it needs oil hours or unit hours');
  });
});
