/** What the results decide of an incident, for tests that compare ways of judging the same results. */
import type { Incident } from '../../src/incidents/model.ts';

/** The verdict of an incident: everything but what was told to whom. */
export function verdict(i: Incident) {
  const { announced: _a, eventSeq: _e, escalation: _s, told: _t, notifications: _n, ...rest } = i;
  return rest;
}
