/** Errors the user can fix: bad input, bad configuration, bad arguments. Printed without a stack trace. */
export class InputError extends Error {
  override readonly name = 'InputError';
}

/** Turns anything thrown into an Error, so that logs and job failures always carry a message. */
export function asError(e: unknown): Error {
  return e instanceof Error ? e : new Error(typeof e === 'string' ? e : JSON.stringify(e));
}
