/** The log of actions that the verdict folds in after steps (see ComponentIncidents.actions). */
import type { DraftState } from './draft.ts';
import type { RecordedAction } from './model.ts';

/** Actions kept per component; older ones are dropped (a refold reaching back beyond them loses only notes and acknowledgements of long-closed incidents). */
export const ACTION_LOG_LIMIT = 500;

export function logAction(state: DraftState, action: RecordedAction): void {
  state.actionSeq += 1;
  state.actions.push({ seq: state.actionSeq, after: state.judged, action });
  if (state.actions.length > ACTION_LOG_LIMIT) state.actions.splice(0, state.actions.length - ACTION_LOG_LIMIT);
}
