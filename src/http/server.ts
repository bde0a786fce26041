/**
 * The HTTP API: one fastify application with the probes and the metrics, and — for what is given — the
 * result intake, the incident API and acknowledgement-link pages, the component series and charts, and the
 * live event stream. JSON in and out; bearer tokens per role (auth.ts).
 */
import Fastify, { type FastifyError, type FastifyReply, type FastifyRequest } from 'fastify';
import type { Config } from '../domain/config.ts';
import { closureText, describeState, type Incident } from '../incidents/model.ts';
import type { IncidentRoutesStore } from './incidentRoutes.ts';
import type { AckIncidentSummary } from '../notify/ackPage.ts';
import { bySeverity } from '../notify/message.ts';
import type { Logger } from '../telemetry/logger.ts';
import type { Metrics } from '../telemetry/metrics.ts';
import { componentInput } from '../render/componentInput.ts';
import type { ComponentStore, GroupLedger } from '../pipeline/ports.ts';
import { ackLinkRoutes } from './ackLinkRoutes.ts';
import { announcingActions, type EventHub, type LiveEvent } from './eventHub.ts';
import { eventRoutes } from './eventRoutes.ts';
import { boardRoutes } from './boardRoutes.ts';
import type { AccessTokens } from './auth.ts';
import { contractRoutes } from './contractRoutes.ts';
import { healthRoutes } from './healthRoutes.ts';
import { incidentRoutes } from './incidentRoutes.ts';
import { metricsRoute } from './metrics.ts';
import { resolveHttpLimits, type HttpLimits } from './limits.ts';
import { resultRoutes, type ResultRoutesOptions } from './resultRoutes.ts';
import { seriesRoutes } from './seriesRoutes.ts';
import { sampleVerdictRoutes, type SampleVerdictTaker } from './sampleVerdictRoutes.ts';
import { ChartPool } from '../render/chartPool.ts';
import { isStoreUnavailable, UNAVAILABLE_RETRY_AFTER_S } from './unavailable.ts';
import { clientError, notFound } from './clientErrors.ts';
import { addressMatcher, addressOf, FailedAuthGuard, limitConnectionsPerAddress, presentsToken } from './addressLimits.ts';

export interface ServerOptions {
  /** The API's bearer tokens by role (the runtime reads them from the environment: src/runtime/accessTokensFromEnv.ts). */
  readonly tokens: AccessTokens;
  readonly logger: Logger;
  readonly metrics: Metrics;
  /** Readiness check: resolves when Redis answers. */
  ping(): Promise<unknown>;
  /** The result intake; without it, no POST /v1/results (a worker's metrics port). */
  readonly producer?: ResultRoutesOptions['producer'];
  /** Largest request body in bytes. Default 5 MiB (the same as `limits.bodyLimitBytes`). */
  readonly bodyLimitBytes?: number;
  /** Request, socket, live-stream and chart bounds, and the proxies whose X-Forwarded-For is believed; see limits.ts for each default. */
  readonly limits?: Partial<HttpLimits>;
  /** Where charts and series are computed; default: a pool of `limits.chartConcurrency` threads of this process. */
  readonly chartPool?: ChartPool;
  /** Serve /metrics without a token (the runtime sets it from WEARSHIFT_METRICS_PUBLIC=1). Default false. */
  readonly metricsPublic?: boolean;
  /** The incident store, for the incident API and the acknowledgement-link pages. */
  readonly incidents?: IncidentRoutesStore;
  /** Stored histories, group statistics and the configuration, for the series and chart routes. */
  readonly histories?: { readonly store: ComponentStore; readonly ledger: GroupLedger; readonly config: Config };
  /** The OpenAPI document served at GET /openapi.json (src/contracts/openapi.ts); without it, no such route. */
  readonly openApi?: object;
  /** Takes a responder's verdict on a sample in doubt, for POST …/samples/:sampleId/verdict. */
  readonly sampleVerdicts?: SampleVerdictTaker;
  /** Live events, for GET /v1/events. */
  readonly hub?: EventHub;
  /** Link-signing secrets (current first); the pages are served only with a store and at least one secret. */
  readonly ackLinkSecrets?: readonly string[];
  /** Announces incident actions taken here to every process's live feed (Redis pub/sub), so all boards update. */
  readonly announce?: (event: LiveEvent) => void;
  /** The site zone the board and the acknowledgement pages show times in (`display.timeZone`). Default UTC. */
  readonly timeZone?: string;
  /** Milliseconds since the epoch, for the failed-authentication window (tests). Default `Date.now`. */
  readonly clock?: () => number;
}

export async function buildServer(options: ServerOptions) {
  const limits = resolveHttpLimits({ ...options.limits, ...(options.bodyLimitBytes !== undefined && { bodyLimitBytes: options.bodyLimitBytes }) });
  const bodyLimit = limits.bodyLimitBytes;
  const app = Fastify({
    loggerInstance: options.logger,
    bodyLimit,
    // Incident ids run to 256 characters, more when percent-encoded; the router's default of 100 refused them (414).
    routerOptions: { maxParamLength: limits.maxParamLength },
    // X-Forwarded-For is believed only from the configured proxies (none by default); the per-address bounds of
    // requests count the client it names (addressLimits.ts).
    ...(limits.trustedProxies.length > 0 && { trustProxy: [...limits.trustedProxies] }),
    // A body sent a byte at a time, or a socket opened and left idle, is cut off instead of holding a descriptor.
    requestTimeout: limits.requestTimeoutMs,
    keepAliveTimeout: limits.keepAliveTimeoutMs,
    connectionTimeout: limits.idleSocketTimeoutMs,
    http: { headersTimeout: limits.headersTimeoutMs, connectionsCheckingInterval: limits.timeoutCheckIntervalMs },
    // A path parameter over the limit (414) or a path that is not valid percent-encoding (400): refused by the
    // router before any route, in the documented Error shape and without echoing the whole path.
    frameworkErrors: (error, request, reply) => {
      const refused = clientError(error, request as FastifyRequest, { maxParamLength: limits.maxParamLength }) ?? { status: 400, body: { error: 'bad-request', message: 'the request was refused' } };
      void (reply as FastifyReply).code(refused.status).send(refused.body);
    },
  });
  app.server.maxConnections = limits.maxConnections;
  // A trusted proxy's sockets count by its own address (not its /64): each proxy has the allowance to itself.
  limitConnectionsPerAddress(app.server, limits.maxConnectionsPerAddress, addressMatcher(limits.trustedProxies));
  // Guessing tokens is slowed down per address (every address of one IPv6 /64 counts as one, addressKey): after too
  // many unknown tokens, 429 until the window ends.
  const guesses = new FailedAuthGuard({ max: limits.maxFailedAuthPerAddress, windowMs: limits.failedAuthWindowMs, addresses: limits.failedAuthAddresses, ...(options.clock !== undefined && { now: options.clock }) });
  app.addHook('onRequest', async (request, reply) => {
    if (!presentsToken(request)) return;
    const waitS = guesses.lockedFor(addressOf(request));
    if (waitS === undefined) return;
    await reply
      .code(429)
      .header('retry-after', String(waitS))
      .header('connection', 'close')
      .send({ error: 'too-many-requests', message: `too many unknown tokens from this address; try again in ${waitS} s` });
  });
  app.addHook('onResponse', async (request, reply) => {
    if (reply.statusCode === 401 && presentsToken(request)) guesses.failed(addressOf(request));
  });
  // A refused request (no token, too large) gets its answer and then the socket is closed, whatever the client
  // still sends: a refused body is not read to its end.
  app.addHook('onSend', async (_request, reply) => {
    if ([401, 403, 408, 413].includes(reply.statusCode)) reply.header('connection', 'close');
  });
  // Every refusal in the documented Error shape: the body parsers' (invalid or empty JSON, too large, a content type no
  // route takes) as the routes' own.
  app.setNotFoundHandler(async (request, reply) => reply.code(404).send(notFound(request)));
  app.setErrorHandler(async (error: FastifyError, request, reply) => {
    const refused = clientError(error, request);
    if (refused !== undefined) return reply.code(refused.status).send(refused.body);
    if (isStoreUnavailable(error) || !(await answers(options.ping))) {
      request.log.warn({ err: error.message }, 'store unavailable');
      return reply
        .code(503)
        .header('retry-after', String(UNAVAILABLE_RETRY_AFTER_S))
        .send({ error: 'unavailable', message: `the store is unavailable; nothing was changed, try again in ${UNAVAILABLE_RETRY_AFTER_S} s` });
    }
    request.log.error({ err: error }, 'request failed');
    return reply.code(500).send({ error: 'internal', message: `the request failed (request ${request.id}); the service log has the details` });
  });
  await app.register(healthRoutes, { ping: options.ping });
  if (options.openApi !== undefined) await app.register(contractRoutes, { openApi: options.openApi });
  await app.register(metricsRoute, { tokens: options.tokens, metrics: options.metrics, ...(options.metricsPublic !== undefined && { public: options.metricsPublic }) });
  if (options.producer !== undefined) {
    await app.register(resultRoutes, { tokens: options.tokens, producer: options.producer, metrics: options.metrics, bodyLimitBytes: bodyLimit, maxRecords: limits.maxRecordsPerRequest });
  }
  if (options.hub !== undefined) await app.register(eventRoutes, { tokens: options.tokens, hub: options.hub,
      maxBufferedBytes: limits.maxEventBufferBytes,
      maxClients: limits.maxEventClients,
      maxClientsPerToken: limits.maxEventClientsPerToken,
      maxClientsPerAddress: limits.maxEventClientsPerAddress,
    });
  const histories = options.histories;
  if (histories !== undefined) {
    const pool = options.chartPool ?? new ChartPool({ concurrency: limits.chartConcurrency, queue: limits.chartQueue, timeoutMs: limits.chartTimeoutMs, sampleBudget: limits.chartSampleBudget });
    if (options.chartPool === undefined) app.addHook('onClose', async () => pool.close());
    await app.register(seriesRoutes, {
      tokens: options.tokens,
      // The latest samples the chart draws, from the stored checkpoint before them: a long history costs no more.
      loadInput: (unit, component) => componentInput(histories.store, histories.ledger, histories.config, { unit, component }, { latestSamples: pool.sampleBudget }),
      pool,
    });
  }
  if (options.sampleVerdicts !== undefined) await app.register(sampleVerdictRoutes, { tokens: options.tokens, verdicts: options.sampleVerdicts });
  // Acknowledgements from the API, the board or an e-mail link are announced like the worker's incident changes.
  const store = options.incidents && (options.announce ? announcingActions(options.incidents, options.announce) : options.incidents);
  if (store !== undefined) await app.register(incidentRoutes, { tokens: options.tokens, store, scanRecords: limits.incidentScanRecords, scanConcurrency: limits.incidentScanConcurrency });
  if (options.producer !== undefined) await app.register(boardRoutes, { tokens: options.tokens, ...(options.timeZone !== undefined && { timeZone: options.timeZone }) });
  if (store !== undefined && (options.ackLinkSecrets?.length ?? 0) > 0) {
    await app.register(ackLinkRoutes, {
      secrets: [...options.ackLinkSecrets!],
      acknowledge: async (incidentId, by, note, context) => {
        // The signed recipient the link was sent to is recorded beside the name typed on the page.
        await store.applyAction({ kind: 'acknowledge', incidentId, by, now: new Date(), recipient: context.recipient, credential: `e-mail link to ${context.recipient}`, ...(note !== undefined && { note }) });
      },
      describe: async (incidentId) => {
        const incident = await store.get(incidentId);
        return incident === undefined ? undefined : ackSummary(incident, options.timeZone);
      },
    });
  }
  return app;
}

/** Whether the store answers within a second. */
async function answers(ping: () => Promise<unknown>): Promise<boolean> {
  let timer: NodeJS.Timeout | undefined;
  try {
    await Promise.race([ping(), new Promise((_, reject) => (timer = setTimeout(() => reject(new Error('timeout')), 1000)))]);
    return true;
  } catch {
    return false;
  } finally {
    clearTimeout(timer);
  }
}

/** The incident as the acknowledgement pages show it. */
export function ackSummary(incident: Incident, timeZone: string | undefined): AckIncidentSummary {
  // Most severe first, as the board, e-mail and API list the evidence: the first one carries the incident's severity.
  const latest = bySeverity(incident.evidence)[0];
  return {
    id: incident.id,
    unit: incident.unit,
    component: incident.component,
    severity: incident.severity,
    peakSeverity: incident.peakSeverity,
    // Closed: how, in the words of the closing message (withdrawn, a sample verdict, resolved…).
    state: incident.closed === null ? describeState(incident) : `closed — ${closureText(incident.closed)}`,
    // A closing whose evidence was set aside (withdrawn, or a sample verdict) stands on nothing: its severity is only
    // what was last announced.
    ...(incident.closed !== null && (incident.withdrawnEvidence?.length ?? 0) > 0 && incident.evidence.length === 0 && { setAside: true }),
    ...(timeZone !== undefined && { timeZone }),
    openedAt: incident.openedAt,
    ...(latest !== undefined && { whatChanged: latest.explanation }),
    ...(incident.acknowledged !== null && { acknowledgedBy: incident.acknowledged.by }),
    closed: incident.closed !== null,
  };
}

export type WearshiftServer = Awaited<ReturnType<typeof buildServer>>;
