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

export interface ServiceCommandOptions {
  config?: string;
  port?: string;
  metricsPort?: string;
  shutdownTimeout?: string;
  opcuaPort?: string;
  historyThreads?: string;
}

export type ServiceKind = 'serve' | 'worker' | 'api';

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
  const running = await startServices({
    workers: kind !== 'api',
    http: kind !== 'worker',
    config,
    logger,
    port,
    env,
    ...(opts.metricsPort !== undefined && { metricsPort: portNumber(opts.metricsPort, '--metrics-port') }),
    ...(opts.opcuaPort !== undefined && { opcuaPort: portNumber(opts.opcuaPort, '--opcua-port') }),
    ...(historyThreads !== undefined && { workerSettings: { historyThreads } }),
  });
  if (running.url !== undefined) logger.info({ url: running.url }, 'listening');
  onShutdownSignals(running.closers, { logger, timeoutMs });
}
