/** How a delivery failed, for the queue: retry later, or never. */

/** A later attempt may go through (the notify worker retries with backoff, or after the receiver's Retry-After). */
export class DeliveryRetry extends Error {
  override readonly name = 'DeliveryRetry';
  constructor(
    message: string,
    /** The receiver asked for this wait before the next attempt. */
    readonly retryAfterMs?: number,
  ) {
    super(message);
  }
}

/** The receiver or the configuration will refuse this delivery again: no retry. */
export class DeliveryRefused extends Error {
  override readonly name = 'DeliveryRefused';
}
