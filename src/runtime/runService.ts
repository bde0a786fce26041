/** What `wearshift serve|worker|api` share: configuration, logger, the services, and shutdown on signals. */
import { availableParallelism } from 'node:os';
import { loadConfig } from './loadConfig.ts';
import { InputError } from '../domain/errors.ts';
import type { Config } from '../domain/config.ts';
import { channelSecretRefs } from '../channels/registry.ts';
import { createLogger, type Logger } from '../telemetry/logger.ts';
import { secretsFromEnv, secretsOfConfig } from '../telemetry/redactText.ts';
import { DEFAULT_PORT, startServices } from './services.ts';
import { DEFAULT_SHUTDOWN_TIMEOUT_MS, onShutdownSignals } from './shutdown.ts';
import { listenRefusal, sharedPort, type Listener } from './listenRefusal.ts';

export interface ServiceCommandOptions {
  config?: string;
  port?: string;
  metricsPort?: string;
  shutdownTimeout?: string;
  opcuaPort?: string;
  historyThreads?: string;
  resultsAtOnce?: string;
  arrivalOrder?: boolean;
}

export type ServiceKind = 'serve' | 'worker' | 'api';

/** `--results-at-once` at most: each results job in flight holds its record in memory until its batch commits. */
export const MAX_RESULTS_AT_ONCE = 100_000;

/** More evaluation threads than this would only wait on one Redis in turn. */
export const MAX_HISTORY_THREADS = 16;

/**
 * `--history-threads` when not given: the machine's cores, at most 4; none on one core (the worker's own thread
 * would only wait for a single one). Threads start only when a history job comes and end a minute after it.
 */
export function defaultHistoryThreads(cores = availableParallelism()): number {
  return cores < 2 ? 0 : Math.min(cores, 4);
}

export function portNumber(raw: string, what: string): number {
  const n = Number(raw);
  if (!Number.isInteger(n) || n < 0 || n > 65535) throw new InputError(`${what}: expected a port number from 0 to 65535, got "${raw}"`);
  return n;
}

/** The logger of a service: every line scrubbed of the API tokens and of the passwords and secrets the configuration names. */
export function serviceLogger(kind: ServiceKind, config: Config, env: NodeJS.ProcessEnv, destination?: NodeJS.WritableStream): Logger {
  return createLogger({ base: { role: kind }, secrets: [...secretsFromEnv(env), ...secretsOfConfig(config, env, channelSecretRefs(config.channels))], ...(destination !== undefined && { destination }) });
}

export async function runService(kind: ServiceKind, opts: ServiceCommandOptions, env: NodeJS.ProcessEnv = process.env): Promise<void> {
  const config = loadConfig(opts.config ?? env.WEARSHIFT_CONFIG);
  const logger = serviceLogger(kind, config, env);
  const port = opts.port !== undefined ? portNumber(opts.port, '--port') : env.PORT !== undefined && env.PORT !== '' ? portNumber(env.PORT, 'PORT') : DEFAULT_PORT;
  const timeoutMs = opts.shutdownTimeout === undefined ? DEFAULT_SHUTDOWN_TIMEOUT_MS : Number(opts.shutdownTimeout) * 1000;
  if (!(timeoutMs > 0)) throw new InputError(`--shutdown-timeout: expected a positive number of seconds, got "${opts.shutdownTimeout}"`);
  const historyThreads = opts.historyThreads === undefined ? undefined : Number(opts.historyThreads);
  if (historyThreads !== undefined && !(Number.isInteger(historyThreads) && historyThreads >= 0 && historyThreads <= MAX_HISTORY_THREADS)) {
    throw new InputError(`--history-threads: expected a whole number from 0 to ${MAX_HISTORY_THREADS}, got "${opts.historyThreads}"`);
  }
  const resultsAtOnce = opts.resultsAtOnce === undefined ? undefined : Number(opts.resultsAtOnce);
  if (resultsAtOnce !== undefined && !(Number.isInteger(resultsAtOnce) && resultsAtOnce >= 1 && resultsAtOnce <= MAX_RESULTS_AT_ONCE)) {
    throw new InputError(`--results-at-once: expected a whole number from 1 to ${MAX_RESULTS_AT_ONCE}, got "${opts.resultsAtOnce}"`);
  }
  const metricsPort = opts.metricsPort === undefined ? undefined : portNumber(opts.metricsPort, '--metrics-port');
  const opcuaPort = opts.opcuaPort === undefined ? undefined : portNumber(opts.opcuaPort, '--opcua-port');
  // Each port with how it was chosen, for a message that names it if the port is refused.
  const listeners: Listener[] = [];
  if (kind !== 'worker') {
    listeners.push({ what: opts.port !== undefined ? `--port ${port}` : env.PORT !== undefined && env.PORT !== '' ? `PORT ${port}` : `port ${port} (the default; choose another with --port or PORT)`, port });
    if (opcuaPort !== undefined) listeners.push({ what: `--opcua-port ${opcuaPort}`, port: opcuaPort });
    else if (config.opcua?.port !== undefined) listeners.push({ what: `opcua.port ${config.opcua.port} in the configuration`, port: config.opcua.port });
  } else if (metricsPort !== undefined) listeners.push({ what: `--metrics-port ${metricsPort}`, port: metricsPort });
  const shared = sharedPort(listeners);
  if (shared !== undefined) throw shared;
  let running;
  try {
    running = await startServices({
      workers: kind !== 'api',
      http: kind !== 'worker',
      config,
      logger,
      port,
      env,
      ...(metricsPort !== undefined && { metricsPort }),
      ...(opcuaPort !== undefined && { opcuaPort }),
      workerSettings: { ...(historyThreads !== undefined && { historyThreads }), ...(resultsAtOnce !== undefined && { resultsConcurrency: resultsAtOnce }), ...(opts.arrivalOrder === false && { arrivalOrder: false }) },
    });
  } catch (e) {
    // What did start is closed by then; a port in use is the user's to fix, not a stack trace.
    throw listenRefusal(e, listeners);
  }
  if (running.url !== undefined) logger.info({ url: running.url }, 'listening');
  onShutdownSignals(running.closers, { logger, timeoutMs });
}
