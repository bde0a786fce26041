/**
 * What a change finding says about the rate it was judged against: against a group baseline, the filter's rate
 * learnt for this component starting from the group's (both named when they differ); against the own baseline, the
 * samples it was learnt from, first to last; and the rate in the measurand's own unit (the PQ index is no ppm).
 * Simulated with the documented noise model (src/simulation/wearSeries.ts).
 */
import { describe, expect, it } from 'vitest';
import { groupBaseline } from '../../src/analysis/baseline.ts';
import { evaluateComponent } from '../../src/analysis/evaluate.ts';
import { ownBaselineSpan } from '../../src/analysis/fold/changeTrack.ts';
import type { BaselineSums, GroupStats } from '../../src/analysis/model.ts';
import { parseConfig } from '../../src/domain/configFile.ts';
import type { Finding } from '../../src/domain/finding.ts';
import { resolveSettings } from '../../src/domain/settings.ts';
import { IN_CONTROL, SIM_CONFIG, simulatedSamples, steppedFe } from '../helpers/wearFleet.ts';

const settings = resolveSettings(parseConfig(SIM_CONFIG), { unit: 'SIM', component: 'gearbox', group: 'sim-gearboxes' });
const rises = (findings: readonly Finding[]) => findings.filter((f) => (f.rule === 'cusum' || f.rule === 'ewma') && f.direction === 'up');
const per100h = (rate: number) => `${Number((rate * 100).toPrecision(3))} ppm/100 h`;

/** A group baseline pooled from the own baselines of four simulated units wearing iron at the in-control rate. */
function simGroup(): GroupStats {
  const sums: BaselineSums[] = [11, 12, 13, 14].map((seed) => evaluateComponent(simulatedSamples({ samples: 20 }, seed), settings).baselines.Fe!);
  const fe = groupBaseline(sums, 250)!;
  expect(fe.components).toBe(4);
  expect(fe.rateVariance).toBeGreaterThan(0);
  return { group: 'sim-gearboxes', bands: {}, baselines: { Fe: fe } };
}

describe('a change finding judged against the group baseline', () => {
  it('names the rate it judged against as learnt for this component, starting from the group\u2019s rate, which it names too', () => {
    const group = simGroup();
    const groupRate = group.baselines.Fe!.rate;
    // A unit wearing at half the group's rate until its rate triples, all before its own baseline is complete.
    const samples = simulatedSamples({ samples: 11, metals: { Fe: { rate: groupRate / 2, processVariance: 0.016, step: { atHours: 5 * IN_CONTROL.intervalHours, factor: 6 } } } }, 99);
    const ev = evaluateComponent(samples, settings, group);
    const at = ev.steps.findIndex((s) => rises(s.findings).length > 0);
    expect(at).toBeGreaterThan(0);
    const point = ev.steps[at]!.detail.change.find((p) => p.interval.measurand === 'Fe')!;
    expect(point.source).toBe('group');
    expect(point.sourceRate).toBe(groupRate);
    // The filter has learnt this slower unit's rate: the reference rate is not the group's.
    expect(per100h(point.baselineRate)).not.toBe(per100h(groupRate));
    for (const f of rises(ev.steps[at]!.findings)) {
      expect(f.explanation).toContain(`against the reference rate ${per100h(point.baselineRate)}, learnt for this component from its readings starting from group sim-gearboxes's rate of ${per100h(groupRate)}`);
      expect(f.explanation).toMatch(/this component's own baseline has \d+ of 12 intervals/);
      expect(f.explanation).not.toContain('typical of its components, not of this one');
    }
  });
});

describe('a change finding judged against the own baseline', () => {
  it('names the baseline\u2019s samples from the reading its first interval starts at to the one that completed it', () => {
    const samples = simulatedSamples({ samples: 40, metals: steppedFe(25 * IN_CONTROL.intervalHours, 3) }, 101);
    const ev = evaluateComponent(samples, settings);
    const own = ev.state.change.Fe!.own;
    // The first baseline interval is the first one judged (no running-in in SIM_CONFIG): from the first sample to the second.
    const first = ev.steps.flatMap((s) => s.detail.intervals).find((iv) => iv.measurand === 'Fe' && !iv.censored)!;
    expect(first.from?.sampleId).toBe(samples[0]!.sampleId);
    expect(own.start).toEqual({ sampleId: samples[0]!.sampleId, sampledAt: samples[0]!.sampledAt });
    expect(own.completedSampleId).toBe(samples[12]!.sampleId);
    const finding = rises(ev.steps.at(-1)!.findings)[0]!;
    expect(finding.explanation).toContain(`what this component's own samples ${samples[0]!.sampleId} to ${samples[12]!.sampleId} (12 intervals) showed`);
  });

  it('reads a checkpoint stored before the start was recorded, naming what it knows: the sample that ended the first interval', () => {
    const samples = simulatedSamples({ samples: 40, metals: steppedFe(25 * IN_CONTROL.intervalHours, 3) }, 101);
    const before = evaluateComponent(samples.slice(0, 20), settings);
    const { start: _start, ...rest } = before.state.change.Fe!.own;
    const stored = { ...before.state, change: { Fe: { ...before.state.change.Fe!, own: { ...rest, firstSampleId: samples[1]!.sampleId, firstSampledAt: samples[1]!.sampledAt } } } };
    const resumed = evaluateComponent(samples.slice(20), settings, undefined, { start: JSON.parse(JSON.stringify(stored)) });
    const whole = evaluateComponent(samples, settings);
    // The same findings as the whole history, only the words for the baseline's samples differ.
    expect(resumed.steps.map((s) => s.findings.map((f) => f.rule))).toEqual(whole.steps.slice(20).map((s) => s.findings.map((f) => f.rule)));
    const finding = rises(resumed.steps.at(-1)!.findings)[0]!;
    expect(finding.explanation).toContain(`what this component's own samples up to ${samples[12]!.sampleId} (12 intervals, the first ending at ${samples[1]!.sampleId}) showed`);
    expect(finding.explanation).not.toContain('undefined');
  });

  it('says "since new oil" when the first baseline interval starts from fresh oil', () => {
    expect(ownBaselineSpan({ sums: { intervals: 12, sumHours: 1, sumHoursSq: 1, sumIncrement: 1, sumIncrementSq: 1, sumIncrementHours: 1, sumLabVariance: 1 }, start: 'new oil', completedAt: 11, completedSampleId: 'S11' })).toBe(
      'samples since new oil up to S11 (12 intervals)',
    );
  });
});

describe('a change finding on the PQ index', () => {
  it('gives the wear rates in index points per 100 h, the catalogue\u2019s unit, not ppm', () => {
    const pqSettings = resolveSettings(parseConfig(SIM_CONFIG.replace('measurands: [Fe]', 'measurands: [pq]')), { unit: 'SIM', component: 'gearbox', group: 'sim-gearboxes' });
    const samples = simulatedSamples({ samples: 40, metals: { pq: { ...IN_CONTROL.metals.Fe!, step: { atHours: 25 * IN_CONTROL.intervalHours, factor: 3 } } } }, 7);
    const found = evaluateComponent(samples, pqSettings).steps.flatMap((s) => rises(s.findings));
    expect(found.length).toBeGreaterThan(0);
    for (const f of found) {
      expect(f.measurand).toBe('pq');
      expect(f.explanation).toMatch(/gained -?[\d.]+ index points\/100 h against the reference rate [\d.]+ index points\/100 h/);
      expect(f.explanation).not.toContain('ppm');
    }
  });
});
