/**
 * Whether an error means the store (Redis) is away rather than a fault of the request or the program: then a
 * request is answered 503 with Retry-After, never 500 with the client library's message.
 */

const UNAVAILABLE = /enableOfflineQueue|offline queue|Connection is closed|ECONNREFUSED|ECONNRESET|ETIMEDOUT|EHOSTUNREACH|max retries per request|Stream isn't writeable|CLUSTERDOWN|LOADING|READONLY|MASTERDOWN|connection lost|Command timed out/i;

export function isStoreUnavailable(error: unknown): boolean {
  if (!(error instanceof Error)) return false;
  if (error.name === 'MaxRetriesPerRequestError') return true;
  const code = (error as { code?: unknown }).code;
  if (typeof code === 'string' && /^(ECONNREFUSED|ECONNRESET|ETIMEDOUT|EHOSTUNREACH|EPIPE)$/.test(code)) return true;
  return UNAVAILABLE.test(error.message);
}

/** Seconds a client is asked to wait before trying again while the store is away. */
export const UNAVAILABLE_RETRY_AFTER_S = 5;
