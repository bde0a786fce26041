/**
 * Shelving is time-limited: every operation first lifts the shelving whose time is up. The lifting is logged like an
 * operator's action (by nobody, at the shelving's end), so that folding the history again puts it back in place.
 */
import type { DraftState, Work } from './draft.ts';
import { logAction } from './actionLog.ts';
import { judgeAction } from './verdict.ts';

export function endExpiredShelving(state: DraftState, work: Work): void {
  for (const inc of Object.values(state.incidents)) {
    if (inc.shelved === null || Date.parse(inc.shelved.until) > work.now.getTime()) continue;
    const action = { kind: 'unshelve', incidentId: inc.id, at: inc.shelved.until } as const;
    judgeAction(state, action, work.rules);
    logAction(state, action);
  }
}
