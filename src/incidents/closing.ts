/** Closing an incident: the end of its escalation, and the last word to everyone told of it. */
import { tellReached } from './escalation.ts';
import type { DraftIncident, Work } from './draft.ts';
import type { Closure } from './model.ts';

const CLOSED_BECAUSE: Record<Closure['how'], string> = {
  'acknowledged-and-returned': 'returned to normal and acknowledged',
  resolved: 'resolved by hand',
  'returned-unannounced': 'returned to normal before anyone was told',
};

export function cancelEscalations(inc: DraftIncident, work: Work, reason: 'acknowledged' | 'shelved' | 'closed'): void {
  if (inc.escalation.dueAt === null) return;
  inc.escalation.dueAt = null;
  work.effects.push({ kind: 'cancel-escalations', key: `${inc.id}:cancel:${reason}:${work.now.getTime()}`, incidentId: inc.id, reason });
}

export function closeIncident(inc: DraftIncident, closure: Closure, work: Work, options: { quiet: boolean }): void {
  const wasShelved = inc.shelved !== null;
  cancelEscalations(inc, work, 'closed');
  inc.closed = closure;
  inc.shelved = null;
  inc.stepsSinceEnd = 0;
  inc.timeline.push({ kind: 'closed', ...closure });
  const note = closure.note === undefined ? '' : `: ${closure.note}`;
  if (!options.quiet && !wasShelved) tellReached(inc, work, 'wearshift.incident.closed', `${CLOSED_BECAUSE[closure.how]}${note}`);
}
