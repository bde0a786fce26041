/**
 * The fleet and configuration of the arrival-order tests (tests/unit/pipeline-order.property.test.ts and
 * tests/integration/held-state.test.ts): five invented gearboxes, one with a tripled iron wear rate, with revisions of
 * a few samples; group statistics within reach (population limits, pooled baselines, the comparison with peers).
 */
import { parseConfig } from '../../src/domain/configFile.ts';
import type { ResultEvent } from '../../src/domain/event.ts';
import type { Incident } from '../../src/incidents/model.ts';
import { inventedFleet } from './fleetCsv.ts';

export const ORDER_CONFIG = parseConfig(`
detection:
  measurands: [Fe, Cu]
  runningInHours: 0
  baselineIntervals: 4
population: { minResults: 6, bandHours: [0, 500], peers: { minComponents: 3 } }
groups:
  - name: lift-gearboxes
    match: { component: gearbox, unit: "^LS" }
    sumpLitres: 40
    limits: { Fe: { caution: 45, alarm: 70 }, Si: { caution: 15, alarm: 25 } }
`);

export const ORDER_NOW = Date.parse('2026-06-01T00:00:00Z');

/** The verdict of an incident: everything but what was told to whom. */
export function verdictOf(i: Incident) {
  const { announced: _a, eventSeq: _e, escalation: _s, told: _t, notifications: _n, ...rest } = i;
  return rest;
}

/** Five gearboxes (one with a tripled iron wear rate), with revisions of a few samples. */
export function fleetWithRevisions(): ResultEvent[] {
  const base = inventedFleet({ units: 5, samplesPerUnit: 18, seed: 7 });
  const revised = base.filter((_, i) => i % 11 === 3).map((e) => ({ ...e, revision: 1, readings: { ...e.readings, Fe: Number(e.readings.Fe) + 6 } }));
  return [...base, ...revised];
}
