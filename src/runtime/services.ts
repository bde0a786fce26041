/**
 * The long-running parts of one process, as `serve` (workers and HTTP), `worker` (workers only) and `api`
 * (HTTP only) start them, with the order in which they close: first stop taking jobs and let the active
 * ones finish, then close HTTP, then the Redis connections.
 */
import type { Queue } from 'bullmq';
import type { Config } from '../domain/config.ts';
import { announcingActions, createEventHub } from '../http/eventHub.ts';
import { OpcuaConfigSchema } from '../domain/opcuaConfig.ts';
import { buildServer } from '../http/server.ts';
import { incidentRules } from '../incidents/policy.ts';
import { createResultProducer } from '../queue/producer.ts';
import { redisDisabledEndpoints } from '../redis/disabledEndpoints.ts';
import { notificationChannels } from '../channels/openChannels.ts';
import { checkAckLinkSecret, checkChannelSecrets, configuredChannels } from '../channels/registry.ts';
import { openPartitionedQueues, openSharedQueue, QUEUE_NAMES, resolveQueueSettings } from '../queue/queues.ts';
import { Partitions } from '../redis/keys.ts';
import { openApiDocument } from '../contracts/openapi.ts';
import { accessTokensFromEnv, TOKEN_VARIABLES } from './accessTokensFromEnv.ts';
import { ackLinkSecrets as ackLinkSecretsOf } from '../notify/ackLink.ts';
import { SampleVerdicts } from '../queue/sampleVerdicts.ts';
import { startWorkers, type WorkerSettings } from '../queue/workers.ts';
import { RedisIncidents } from '../redis/redisIncidents.ts';
import { readComponentRegistry } from '../redis/componentRegistry.ts';
import { RedisStore } from '../redis/redisStore.ts';
import { bridgeLiveEvents, livePublisher } from './liveBridge.ts';
import type { Logger } from '../telemetry/logger.ts';
import { createMetrics } from '../telemetry/metrics.ts';
import { tierZeroResponders } from '../incidents/responders.ts';
import { readRecentIncidents } from '../redis/recentIncidents.ts';
import { registerAlarmGauges } from './alarmGauges.ts';
import { checkEvictionPolicy, connectRedis, databaseRefusalOnceReady, describeTarget, redisTarget, type RedisConnection } from '../redis/connection.ts';
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
  /** Start the OPC UA alarm server on this port (overrides `opcua.port`); with `http` only. */
  readonly opcuaPort?: number;
}

export interface RunningServices {
  /** Closers in shutdown order. */
  readonly closers: readonly Closer[];
  /** Where the HTTP server listens, when it does. */
  readonly url?: string;
}

export const DEFAULT_PORT = 8080;

/**
 * The one line an API started without any token says: nothing but the probes, the OpenAPI document and the
 * acknowledgement links is served then, so an operator who forgot the variables learns it at start, not from the
 * board's sign-in. Undefined while one token variable holds a token.
 */
export function missingTokensWarning(env: NodeJS.ProcessEnv): string | undefined {
  const variables = Object.values(TOKEN_VARIABLES);
  if (variables.some((v) => (env[v] ?? '').split(',').some((t) => t.trim() !== ''))) return undefined;
  return (
    `no API tokens: none of ${variables.join(', ')} is set, so every /v1 request and the board's sign-in are refused with 401 ` +
    '(no results posted over HTTP, no incidents viewed or acknowledged there, /metrics too unless WEARSHIFT_METRICS_PUBLIC=1); ' +
    'set them to tokens of at least 16 characters, e.g. `openssl rand -base64 24`'
  );
}

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
  const target = redisTarget(config, env);
  const partitionCount = config.redis.partitions;
  const prefix = config.redis.prefix;
  const port = options.port ?? DEFAULT_PORT;
  // A worker whose channels lack a usable secret does not start: found now, not by the first alarm.
  if (options.workers) checkChannelSecrets(config.channels, env);
  // Nor does an API that would serve the acknowledgement pages without a secret to check the links with.
  if (options.http) checkAckLinkSecret(config.channels, env);
  const stopWorkers: Closer[] = [];
  const stopHttp: Closer[] = [];
  const connections: RedisConnection[] = [];
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
  logger.info({ redis: describeTarget(target), prefix, partitions: partitionCount, workers: options.workers, http: options.http }, 'starting');

  // Requests fail fast while Redis is away; workers wait for it.
  const request = connectRedis(target, 'request', logger);
  connections.push(request);
  request.once('ready', () => void checkEvictionPolicy(request, logger));
  // A database the server does not have ends the start here, before a worker takes a job or the API listens: every
  // command would otherwise go to database 0.
  const refusal = await databaseRefusalOnceReady(request, target);
  if (refusal !== undefined) throw refusal;
  const metrics = createMetrics();
  const queueSettings = resolveQueueSettings({ ...options.workerSettings, prefix });
  const partitions = new Partitions(prefix, partitionCount);
  const evaluateQueues = openPartitionedQueues(QUEUE_NAMES.evaluate, request, queueSettings, partitions);
  const counted: Array<readonly [string, Queue[]]> = [
    [QUEUE_NAMES.results, openPartitionedQueues(QUEUE_NAMES.results, request, queueSettings, partitions)],
    [QUEUE_NAMES.history, [openSharedQueue(QUEUE_NAMES.history, request, queueSettings, partitions)]],
    [QUEUE_NAMES.evaluate, evaluateQueues],
    [QUEUE_NAMES.notify, [openSharedQueue(QUEUE_NAMES.notify, request, queueSettings, partitions)]],
    [QUEUE_NAMES.escalate, [openSharedQueue(QUEUE_NAMES.escalate, request, queueSettings, partitions)]],
  ];
  stopQueues.push({ name: 'queues', close: () => Promise.all(counted.flatMap(([, qs]) => qs.map((q) => q.close()))) });
  metrics.watchQueues(async () => {
    const states = ['waiting', 'active', 'delayed', 'prioritized', 'failed'] as const;
    const entries = await Promise.all(
      counted.map(async ([name, qs]) => {
        const counts = await Promise.all(qs.map((q) => q.getJobCounts(...states)));
        const total: Record<string, number> = {};
        for (const c of counts) for (const [k, v] of Object.entries(c)) total[k] = (total[k] ?? 0) + v;
        return [name, total] as const;
      }),
    );
    return Object.fromEntries(entries);
  });
  registerAlarmGauges(metrics.registry, {
    source: (o) => readRecentIncidents(request, partitions, o),
    config: config.alarmFigures,
    responders: tierZeroResponders(config.escalation.policies),
  });
  const apiBaseUrl = config.channels.ackLinks?.baseUrl ?? `http://localhost:${port}`;

  if (options.workers) {
    const connection = connectRedis(target, 'worker', logger);
    connections.push(connection);
    const hasChannels = configuredChannels(config.channels).length > 0;
    if (hasChannels && config.channels.ackLinks === undefined) logger.warn(`messages will link to ${apiBaseUrl}; set channels.ackLinks.baseUrl to the public address of the API`);
    const workers = startWorkers(
      {
        connection,
        config,
        logger,
        metrics,
        ...(hasChannels && { channels: notificationChannels(config.channels, { logger, env, disabledEndpoints: redisDisabledEndpoints(connection, prefix), timeZone: config.display.timeZone }) }),
        apiBaseUrl,
        live: livePublisher(connection, prefix, logger),
        target,
      },
      { ...options.workerSettings, prefix, partitions: partitionCount },
    );
    stopWorkers.push({ name: 'queue workers', close: () => workers.close() });
  }

  let listening: string | undefined;
  if (options.http || options.metricsPort !== undefined) {
    const ping = () => request.ping();
    // Tokens and the metrics switch come from the environment here, and are handed to the server.
    const tokens = accessTokensFromEnv(env);
    if (options.http) {
      const warning = missingTokensWarning(env);
      if (warning !== undefined) logger.warn(warning);
    }
    const metricsPublic = env.WEARSHIFT_METRICS_PUBLIC === '1';
    let server;
    if (options.http) {
      const producer = createResultProducer({ connection: request, prefix, partitions: partitionCount, origin: 'http' });
      const hub = createEventHub();
      const subscriber = connectRedis(target, 'worker', logger);
      connections.push(subscriber);
      subscriber.once('ready', () => void bridgeLiveEvents(subscriber, prefix, hub, logger).catch((e: Error) => logger.warn({ err: e.message }, 'live events unavailable')));
      // Checked above: with channels.ackLinks configured there is at least one, and every one is long enough.
      const ackSecretEnv = config.channels.ackLinks?.secretEnv;
      const ackLinkSecrets = ackSecretEnv === undefined ? [] : ackLinkSecretsOf(env[ackSecretEnv]);
      if (ackSecretEnv === undefined) logger.info('acknowledgement pages not served: channels.ackLinks is not configured, so no e-mail carries an acknowledgement link');
      const httpStore = new RedisStore(request, { prefix, partitions: partitionCount, config });
      const incidents = new RedisIncidents(request, { rules: incidentRules(config), prefix, partitions: partitionCount });
      server = await buildServer({
        tokens,
        metricsPublic,
        ...(config.http !== undefined && { limits: config.http }),
        logger,
        metrics,
        ping,
        openApi: openApiDocument(),
        producer,
        incidents,
        histories: { store: httpStore, ledger: httpStore, config },
        sampleVerdicts: new SampleVerdicts(httpStore, evaluateQueues, partitions, { incidents, live: livePublisher(request, prefix, logger) }),
        hub,
        ackLinkSecrets,
        announce: livePublisher(request, prefix, logger),
        timeZone: config.display.timeZone,
      });
      stopHttp.push({ name: 'result producer', close: () => producer.close() });
      if (options.opcuaPort !== undefined || config.opcua?.port !== undefined) {
        // Loaded only when asked for: the OPC UA stack is large, and every other command starts faster without it.
        const { OpcuaAlarmServer } = await import('../opcua/alarmServer.ts');
        const opcua = new OpcuaAlarmServer({
          config: config.opcua ?? OpcuaConfigSchema.parse({}),
          ...(options.opcuaPort !== undefined && { port: options.opcuaPort }),
          store: announcingActions(incidents, livePublisher(request, prefix, logger)),
          subscribe: (listener) => hub.subscribe((event) => listener(event)),
          logger,
          env,
          incidentMaxShelveHours: config.incidents.maxShelveHours,
          components: (limit) => readComponentRegistry(request, partitions, limit),
        });
        stopHttp.unshift({ name: 'opc ua', close: () => opcua.stop() });
        logger.info({ url: await opcua.start() }, 'OPC UA alarm server listening');
      }
    } else {
      server = await buildServer({ tokens, metricsPublic, logger, metrics, ping });
    }
    stopHttp.unshift({ name: 'http', close: () => server.close() });
    listening = await server.listen({ port: options.http ? port : options.metricsPort!, host: options.host ?? '0.0.0.0' });
  }

  return { closers: started.flat(), ...(listening !== undefined && { url: listening }) };
}
