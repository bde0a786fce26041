/**
 * A responder's word that the wear rate a change detector signals as a rise is the component's usual one (`usual-rate`,
 * analysis/model.ts SampleMark): a component whose own baseline was learnt before a lasting change of duty keeps its
 * EWMA/CUSUM watch standing for as long as the new rate lasts, since the rate is held while a rise is signalled
 * (changeTrack.ts). The word starts a new detector life after the sample it is given on: the detectors judge nothing
 * until a new own baseline has formed from the intervals after it, and then judge against that one, so a later real
 * change is caught again. Simulated data: the documented noise model (src/simulation/wearSeries.ts).
 */
import { describe, expect, it } from 'vitest';
import { evaluateComponent } from '../../src/analysis/evaluate.ts';
import type { SampleMark } from '../../src/analysis/model.ts';
import { readinessOf } from '../../src/analysis/readiness.ts';
import { parseConfig } from '../../src/domain/configFile.ts';
import type { Sample } from '../../src/domain/event.ts';
import { resolveSettings } from '../../src/domain/settings.ts';
import { IN_CONTROL, SIM_CONFIG, simulatedSamples } from '../helpers/wearFleet.ts';

const config = parseConfig(SIM_CONFIG);
const RATE = IN_CONTROL.metals.Fe!.rate;

/** Adds wear at `rate` ppm/h to Fe from sample `from` on, on each charge from its start or from that sample's hours. */
function withExtraWear(samples: readonly Sample[], from: number, rate: number): Sample[] {
  const startHours = samples[from]!.unitHours!;
  let chargeStart = 0;
  return samples.map((s, i) => {
    if (s.oilChanged) chargeStart = s.unitHours! - (s.oilHours ?? 0);
    if (i < from) return s;
    const fe = s.readings.Fe!;
    if (fe.kind !== 'value') return s;
    const extra = rate * (s.unitHours! - Math.max(startHours, chargeStart));
    return { ...s, readings: { ...s.readings, Fe: { kind: 'value', value: Math.round((fe.value + extra) * 10) / 10 } } };
  });
}

const rises = (steps: ReturnType<typeof evaluateComponent>['steps']) =>
  steps.flatMap((s, i) => (s.findings.some((f) => f.measurand === 'Fe' && (f.rule === 'ewma' || f.rule === 'cusum') && f.direction === 'up') ? [i] : []));

describe('a responder\'s word on a usual rate', () => {
  for (const seed of [3, 7, 11]) {
    it(`ends a watch standing on a lasting change of duty, and a later doubling is caught again (seed ${seed})`, () => {
      // The rate rises by half at 6 000 h (about sample 24), after the own baseline formed, and stays there: a duty
      // change the responder knows of. At sample 64 it doubles from there.
      const duty = simulatedSamples({ samples: 90, metals: { Fe: { ...IN_CONTROL.metals.Fe!, step: { atHours: 6000, factor: 1.5 } } } }, seed);
      const samples = withExtraWear(duty, 64, 1.5 * RATE);
      const settings = resolveSettings(config, samples[0]!);
      const before = rises(evaluateComponent(samples, settings).steps);
      const first = before[0]!;
      expect(first).toBeGreaterThanOrEqual(20);
      expect(first).toBeLessThan(40);
      // Without the word the watch stands: the held rate keeps the new one flagged up to the doubling and beyond.
      expect(before.filter((i) => i > first && i < 64).length).toBeGreaterThan((64 - first) * 0.6);

      const marks = new Map<string, SampleMark>([[samples[first]!.sampleId, 'usual-rate']]);
      const after = evaluateComponent(samples, settings, undefined, { marks });
      const afterRises = rises(after.steps);
      // The sample the word was given on keeps its findings; none follow until the doubling.
      expect(afterRises.filter((i) => i <= first)).toEqual(before.filter((i) => i <= first));
      expect(afterRises.filter((i) => i > first && i < 64)).toEqual([]);
      // The new life judges against a baseline of its own again, learnt after the word, and catches the doubling.
      const caught = afterRises.find((i) => i >= 64);
      expect(caught).toBeDefined();
      expect(caught! - 64).toBeLessThanOrEqual(8);
      const track = after.state.change.Fe!;
      expect(track.restartedAt?.sampleId).toBe(samples[first]!.sampleId);
      expect(track.own.completedAt).toBeDefined();
      expect(track.own.start).not.toBe('new oil');
      const start = track.own.start as { sampleId: string };
      expect(samples.findIndex((s) => s.sampleId === start.sampleId)).toBeGreaterThanOrEqual(first);
      // A few samples after the word, what the analysis can judge yet says it waits for the new baseline.
      const soon = samples.slice(0, first + 4);
      const fe = readinessOf(evaluateComponent(soon, settings, undefined, { marks }).state, settings, undefined, soon).find((r) => r.measurand === 'Fe')!;
      expect(fe.changeDetection).toBe('waiting');
      expect(fe.summary).toContain(`learnt again since the word at sample ${samples[first]!.sampleId} that its rate there is usual`);
    });
  }

  it('changes nothing at a sample where no rise is signalled, and leaves the sampling checks to judge the sample', () => {
    const samples = simulatedSamples({ samples: 40 }, 5);
    const settings = resolveSettings(config, samples[0]!);
    const plain = evaluateComponent(samples, settings);
    expect(rises(plain.steps)).toEqual([]);
    const marks = new Map<string, SampleMark>([[samples[30]!.sampleId, 'usual-rate']]);
    const marked = evaluateComponent(samples, settings, undefined, { marks });
    expect(JSON.stringify(marked.steps)).toBe(JSON.stringify(plain.steps));
    expect(JSON.stringify(marked.state)).toBe(JSON.stringify(plain.state));
  });
});
