/** How a delivery failed, for the queue: retry later, or never. */

/** A later attempt may go through (the notify worker retries with backoff, or after the receiver's Retry-After). */
export class DeliveryRetry extends Error {
  override readonly name = 'DeliveryRetry';
  constructor(
    message: string,
    /** The receiver asked for this wait before the next attempt. */
    readonly retryAfterMs?: number,
    /**
     * The attempt ended with an answer that the message was not taken (the receiver answered with an error, or no
     * connection was made). False (the default) when it may have arrived: no answer came in time, or the connection
     * broke after the message was handed over.
     */
    readonly notTaken: boolean = false,
  ) {
    super(message);
  }
}

/** The receiver or the configuration will refuse this delivery again: no retry. */
export class DeliveryRefused extends Error {
  override readonly name = 'DeliveryRefused';
}
