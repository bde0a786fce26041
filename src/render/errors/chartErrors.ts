/** Why a chart or series was not computed: the pool is full, the work ran out of time, or the chart thread failed. */
export class ChartUnavailableError extends Error {
  override readonly name = 'ChartUnavailableError';
  constructor(
    message: string,
    readonly reason: 'busy' | 'timeout' | 'failed' | 'closed',
    /** Seconds the client is asked to wait before asking again. */
    readonly retryAfterS: number,
  ) {
    super(message);
  }
}
