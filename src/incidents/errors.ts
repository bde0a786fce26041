/** Errors of incident actions that callers map onto their own answers (HTTP 404 and 409, CLI exit codes). */
import { InputError } from '../domain/errors.ts';

export class IncidentNotFoundError extends InputError {
  constructor(readonly incidentId: string) {
    super(`no incident "${incidentId}"`);
  }
}

/**
 * The action does not fit the incident's state, e.g. acknowledging a closed incident. `retryAfterSeconds`: the state
 * is passing (the incident is being judged again), and the same action is likely to be taken after that long.
 */
export class IncidentConflictError extends InputError {
  constructor(
    readonly incidentId: string,
    reason: string,
    readonly retryAfterSeconds?: number,
  ) {
    super(`incident "${incidentId}": ${reason}`);
  }
}
