/** Shelving is time-limited: every operation first lifts the shelving whose time is up. */
import { announceIfDue } from './escalation.ts';
import type { DraftState, Work } from './draft.ts';

export function endExpiredShelving(state: DraftState, work: Work): void {
  for (const inc of Object.values(state.incidents)) {
    if (inc.shelved === null || Date.parse(inc.shelved.until) > work.now.getTime()) continue;
    const until = inc.shelved.until;
    inc.shelved = null;
    inc.timeline.push({ kind: 'unshelved', at: until });
    announceIfDue(inc, work, { quiet: false, shelvingEnded: true });
  }
}
