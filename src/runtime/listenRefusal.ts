/**
 * A port the process cannot listen on is the user's to fix, not a crash: an InputError naming the option (or the
 * variable, or the configuration key) that chose the port, the port, and what to do — printed without a stack, exit 2.
 */
import { InputError } from '../domain/errors.ts';

/** A port a service listens on, and how the user chose it: `--port 8080`, `PORT 8080`, `opcua.port 4840 in the configuration`. */
export interface Listener {
  readonly what: string;
  readonly port: number;
}

const REASONS: Record<string, string> = {
  EADDRINUSE: 'the port is in use (EADDRINUSE): another process listens on it; stop that process or choose another port',
  EACCES: 'not allowed to listen on this port (EACCES): ports below 1024 need privileges; choose a port from 1024 up',
};

/**
 * The error to report for `e`, thrown while the services started: a refused listen (EADDRINUSE, EACCES) becomes an
 * InputError naming the listener whose port it is (Node's listen errors carry the port); anything else is `e` itself.
 */
export function listenRefusal(e: unknown, listeners: readonly Listener[]): unknown {
  const error = e as (NodeJS.ErrnoException & { port?: number }) | undefined;
  const reason = error?.code === undefined ? undefined : REASONS[error.code];
  if (reason === undefined || error?.syscall !== 'listen') return e;
  const listener = listeners.find((l) => l.port === error.port) ?? (listeners.length === 1 ? listeners[0] : undefined);
  return new InputError(`${listener?.what ?? `port ${error.port ?? '?'}`}: ${reason}`);
}

/** Two listeners on one port would refuse each other: said before anything starts. */
export function sharedPort(listeners: readonly Listener[]): InputError | undefined {
  for (const [i, a] of listeners.entries()) {
    const b = listeners.slice(i + 1).find((l) => l.port === a.port && l.port !== 0);
    if (b !== undefined) return new InputError(`${a.what} and ${b.what}: one port for two servers; give each its own`);
  }
  return undefined;
}
