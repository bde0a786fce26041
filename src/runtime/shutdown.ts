/**
 * Graceful shutdown: on SIGTERM or SIGINT, stop taking work, let the active jobs finish, close HTTP and
 * Redis — in that order — but never wait longer than the bound, because a Redis that has gone away can
 * leave a close() hanging. A second signal exits at once.
 */
import type { Logger } from '../telemetry/logger.ts';

export interface Closer {
  readonly name: string;
  close(): Promise<unknown>;
}

export interface ShutdownOptions {
  /** Longest wait for all closers together, in milliseconds. Default 10 000. */
  timeoutMs?: number;
  logger: Logger;
  /** Ends the process. Default `process.exit`. */
  exit?: (code: number) => void;
}

export const DEFAULT_SHUTDOWN_TIMEOUT_MS = 10_000;

/** Runs the closers in order within the bound; resolves with the exit code (0 clean, 1 timed out or failed). */
export async function closeAll(closers: readonly Closer[], options: Pick<ShutdownOptions, 'timeoutMs' | 'logger'>): Promise<number> {
  const timeoutMs = options.timeoutMs ?? DEFAULT_SHUTDOWN_TIMEOUT_MS;
  let failed = false;
  const sequence = (async () => {
    for (const c of closers) {
      try {
        await c.close();
        options.logger.info({ part: c.name }, 'closed');
      } catch (e) {
        failed = true;
        options.logger.error({ part: c.name, err: (e as Error).message }, 'close failed');
      }
    }
    return 'done' as const;
  })();
  let timer: NodeJS.Timeout | undefined;
  const bound = new Promise<'timeout'>((resolve) => {
    timer = setTimeout(() => resolve('timeout'), timeoutMs);
    timer.unref();
  });
  const outcome = await Promise.race([sequence, bound]);
  clearTimeout(timer);
  if (outcome === 'timeout') {
    options.logger.warn({ timeoutMs }, 'shutdown took too long; exiting with work possibly unfinished (BullMQ returns stalled jobs to the queue)');
    return 1;
  }
  return failed ? 1 : 0;
}

/** Installs the signal handlers. Returns the shutdown function, for callers that end the process themselves. */
export function onShutdownSignals(closers: readonly Closer[], options: ShutdownOptions): (reason: string) => Promise<void> {
  const exit = options.exit ?? ((code: number) => process.exit(code));
  let started = false;
  const shutdown = async (reason: string) => {
    if (started) {
      options.logger.warn({ reason }, 'second signal: exiting now');
      exit(1);
      return;
    }
    started = true;
    options.logger.info({ reason }, 'shutting down');
    exit(await closeAll(closers, options));
  };
  for (const signal of ['SIGTERM', 'SIGINT'] as const) process.on(signal, () => void shutdown(signal));
  return shutdown;
}
