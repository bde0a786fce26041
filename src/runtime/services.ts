/**
 * The long-running parts of one process, as `serve` (workers and HTTP), `worker` (workers only) and `api`
 * (HTTP only) start them, with the order in which they close: first stop taking jobs and let the active
 * ones finish, then close HTTP, then the Redis connections.
 */
import type { Queue } from 'bullmq';
import type { Redis } from 'ioredis';
import type { Config } from '../domain/config.ts';
import { createEventHub } from '../http/eventHub.ts';
import { buildServer } from '../http/server.ts';
import { RedisIncidentStore } from '../incidents/redisIncidentStore.ts';
import { incidentRules } from '../incidents/policy.ts';
import { createResultProducer } from '../intake/producer.ts';
import { redisDisabledEndpoints } from '../queue/disabledEndpoints.ts';
import { notificationChannels } from '../queue/notificationChannels.ts';
import { openQueue, QUEUE_NAMES, resolveQueueSettings } from '../queue/queues.ts';
import { startWorkers, type WorkerSettings } from '../queue/workers.ts';
import { RedisStorage } from '../storage/redisStorage.ts';
import { bridgeLiveEvents, livePublisher } from './liveBridge.ts';
import { maskUrl, type Logger } from './logger.ts';
import { createMetrics } from './metrics.ts';
import { checkEvictionPolicy, connectRedis, redisUrl } from './redis.ts';
import { closeAll, DEFAULT_SHUTDOWN_TIMEOUT_MS, type Closer } from './shutdown.ts';

export interface ServiceOptions {
  /** Run the queue workers. */
  readonly workers: boolean;
  /** Serve the HTTP API (with intake); false with `metricsPort` serves only probes and metrics. */
  readonly http: boolean;
  readonly config: Config;
  readonly logger: Logger;
  /** Port of the HTTP API. Default 8080. */
  readonly port?: number;
  /** Interface to listen on. Default 0.0.0.0. */
  readonly host?: string;
  /** For a worker-only process: serve /healthz, /readyz and /metrics on this port. */
  readonly metricsPort?: number;
  readonly workerSettings?: WorkerSettings;
  readonly env?: NodeJS.ProcessEnv;
}

export interface RunningServices {
  /** Closers in shutdown order. */
  readonly closers: readonly Closer[];
  /** Where the HTTP server listens, when it does. */
  readonly url?: string;
}

export const DEFAULT_PORT = 8080;

export async function startServices(options: ServiceOptions): Promise<RunningServices> {
  const started: Closer[][] = [];
  try {
    return await start(options, started);
  } catch (e) {
    // A port in use, a bad secret: what did start must not keep the process alive without signal handlers.
    await closeAll(started.flat(), { logger: options.logger, timeoutMs: DEFAULT_SHUTDOWN_TIMEOUT_MS });
    throw e;
  }
}

async function start(options: ServiceOptions, started: Closer[][]): Promise<RunningServices> {
  const { config, logger } = options;
  const env = options.env ?? process.env;
  const url = redisUrl(config, env);
  const prefix = config.redis.prefix;
  const port = options.port ?? DEFAULT_PORT;
  const stopWorkers: Closer[] = [];
  const stopHttp: Closer[] = [];
  const connections: Redis[] = [];
  const stopQueues: Closer[] = [];
  const stopRedis: Closer[] = [
    {
      name: 'redis',
      close: async () => {
        // quit() waits for Redis to answer; a connection that is not up is dropped instead.
        await Promise.all(connections.map((c) => (c.status === 'ready' ? c.quit().catch(() => c.disconnect()) : (c.disconnect(), undefined))));
      },
    },
  ];
  started.push(stopWorkers, stopHttp, stopQueues, stopRedis);
  logger.info({ redis: maskUrl(url), prefix, workers: options.workers, http: options.http }, 'starting');

  // Requests fail fast while Redis is away; workers wait for it.
  const request = connectRedis(url, 'request', logger);
  connections.push(request);
  request.once('ready', () => void checkEvictionPolicy(request, logger));
  const metrics = createMetrics();
  const queueSettings = resolveQueueSettings({ ...options.workerSettings, prefix });
  const counted: Queue[] = Object.values(QUEUE_NAMES).map((name) => openQueue(name, request, queueSettings));
  stopQueues.push({ name: 'queues', close: () => Promise.all(counted.map((q) => q.close())) });
  metrics.watchQueues(async () => {
    const entries = await Promise.all(counted.map(async (q) => [q.name, await q.getJobCounts('waiting', 'active', 'delayed', 'prioritized', 'failed')] as const));
    return Object.fromEntries(entries);
  });
  const apiBaseUrl = config.channels.ackLinks?.baseUrl ?? `http://localhost:${port}`;

  if (options.workers) {
    const connection = connectRedis(url, 'worker', logger);
    connections.push(connection);
    const incidentStore = new RedisIncidentStore(connection, { rules: incidentRules(config), prefix });
    const hasChannels = config.channels.email !== undefined || config.channels.webhooks.length > 0 || config.channels.mqtt.length > 0;
    if (hasChannels && config.channels.ackLinks === undefined) logger.warn(`messages will link to ${apiBaseUrl}; set channels.ackLinks.baseUrl to the public address of the API`);
    const workers = startWorkers(
      {
        connection,
        config,
        logger,
        metrics,
        incidentStore,
        ...(hasChannels && { channels: notificationChannels(config.channels, { logger, env, disabledEndpoints: redisDisabledEndpoints(connection, prefix) }) }),
        apiBaseUrl,
        live: livePublisher(connection, prefix, logger),
      },
      { ...options.workerSettings, prefix },
    );
    stopWorkers.push({ name: 'queue workers', close: () => workers.close() });
  }

  let listening: string | undefined;
  if (options.http || options.metricsPort !== undefined) {
    const ping = () => request.ping();
    let server;
    if (options.http) {
      const producer = createResultProducer({ connection: request, prefix });
      const hub = createEventHub();
      const subscriber = connectRedis(url, 'worker', logger);
      connections.push(subscriber);
      subscriber.once('ready', () => void bridgeLiveEvents(subscriber, prefix, hub, logger).catch((e: Error) => logger.warn({ err: e.message }, 'live events unavailable')));
      const ackSecretEnv = config.channels.ackLinks?.secretEnv;
      const ackLinkSecrets = ackSecretEnv === undefined ? [] : (env[ackSecretEnv] ?? '').split(',').map((x) => x.trim()).filter((x) => x !== '');
      server = await buildServer({
        logger,
        metrics,
        ping,
        producer,
        incidents: new RedisIncidentStore(request, { rules: incidentRules(config), prefix }),
        histories: { storage: new RedisStorage(request, { prefix }), config },
        hub,
        ackLinkSecrets,
        announce: livePublisher(request, prefix, logger),
      });
      stopHttp.push({ name: 'result producer', close: () => producer.close() });
    } else {
      server = await buildServer({ logger, metrics, ping });
    }
    stopHttp.unshift({ name: 'http', close: () => server.close() });
    listening = await server.listen({ port: options.http ? port : options.metricsPort!, host: options.host ?? '0.0.0.0' });
  }

  return { closers: started.flat(), ...(listening !== undefined && { url: listening }) };
}
