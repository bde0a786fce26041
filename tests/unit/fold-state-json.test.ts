/**
 * The analysis state is plain JSON at every sample: stored as a checkpoint and read back, it is the very state the
 * fold holds (no undefined members, no NaN or Infinity, no Map, Date or class instance). An evaluation that resumes
 * from a checkpoint relies on it to reach the steps of one fold from the start (the order property test,
 * tests/unit/pipeline-order.property.test.ts, checks the outcome; this checks the state itself).
 */
import { describe, expect, it } from 'vitest';
import { AnalysisFold, emptyAnalysisState } from '../../src/analysis/fold/analysisFold.ts';
import { parseConfig } from '../../src/domain/configFile.ts';
import { parseResultEvent, type Sample } from '../../src/domain/event.ts';
import { resolveSettings } from '../../src/domain/settings.ts';
import { FLEET_CONFIG, inventedFleet } from '../helpers/fleetCsv.ts';
import { SIM_CONFIG, simulatedSamples, steppedFe } from '../helpers/wearFleet.ts';

function roundTrips(settings: ReturnType<typeof resolveSettings>, samples: readonly Sample[]): number {
  const fold = new AnalysisFold(settings, emptyAnalysisState(samples[0]!.unit, samples[0]!.component));
  let checked = 0;
  for (const s of samples) {
    fold.advance(s, undefined, undefined);
    const state = fold.state();
    expect(JSON.parse(JSON.stringify(state)), `${s.sampleId}: the state as stored and read back`).toStrictEqual(state);
    checked += 1;
  }
  return checked;
}

describe('the analysis state', () => {
  it('is plain JSON at every sample of a history with oil changes, top-ups, a wear-rate step and a contaminant excursion', () => {
    const config = parseConfig(FLEET_CONFIG);
    const events = inventedFleet({ units: 3, samplesPerUnit: 40, seed: 11 });
    let checked = 0;
    for (const unit of new Set(events.map((e) => e.unit))) {
      const samples = events.filter((e) => e.unit === unit).map((e) => {
        const parsed = parseResultEvent(e);
        if (!parsed.ok) throw new Error(JSON.stringify(parsed.issues));
        return parsed.sample;
      });
      checked += roundTrips(resolveSettings(config, samples[0]!), samples);
    }
    expect(checked).toBe(120);
  });

  it('is plain JSON while a tripled wear rate is signalled and learnt', () => {
    const samples = simulatedSamples({ samples: 60, metals: steppedFe(6000, 3) }, 5);
    expect(roundTrips(resolveSettings(parseConfig(SIM_CONFIG), samples[0]!), samples)).toBe(60);
  });
});
