/**
 * The HTTP API: one fastify application with the result intake, the probes, the metrics and — when an
 * incident store is given — the acknowledgement-link pages. JSON in and out; bearer tokens per role.
 */
import Fastify from 'fastify';
import { describeState, type Incident } from '../incidents/model.ts';
import type { RedisIncidentStore } from '../incidents/redisIncidentStore.ts';
import type { AckIncidentSummary } from '../notify/ackPage.ts';
import type { Logger } from '../runtime/logger.ts';
import type { Metrics } from '../runtime/metrics.ts';
import { ackLinkRoutes } from './ackLinkRoutes.ts';
import { healthRoutes } from './healthRoutes.ts';
import { metricsRoute } from './metrics.ts';
import { DEFAULT_BODY_LIMIT_BYTES, resultRoutes, type ResultRoutesOptions } from './resultRoutes.ts';

export interface ServerOptions {
  readonly logger: Logger;
  readonly metrics: Metrics;
  /** Readiness check: resolves when Redis answers. */
  ping(): Promise<unknown>;
  readonly producer: ResultRoutesOptions['producer'];
  /** Largest request body in bytes. Default 5 MiB. */
  readonly bodyLimitBytes?: number;
  /** Serve /metrics without a token. Default: WEARSHIFT_METRICS_PUBLIC === '1'. */
  readonly metricsPublic?: boolean;
  /** The incident store, for the acknowledgement-link pages. */
  readonly incidents?: RedisIncidentStore;
  /** Link-signing secrets (current first); the pages are served only with a store and at least one secret. */
  readonly ackLinkSecrets?: readonly string[];
}

export async function buildServer(options: ServerOptions) {
  const bodyLimit = options.bodyLimitBytes ?? DEFAULT_BODY_LIMIT_BYTES;
  const app = Fastify({ loggerInstance: options.logger, bodyLimit, disableRequestLogging: false });
  await app.register(healthRoutes, { ping: options.ping });
  await app.register(metricsRoute, { metrics: options.metrics, ...(options.metricsPublic !== undefined && { public: options.metricsPublic }) });
  await app.register(resultRoutes, { producer: options.producer, metrics: options.metrics, bodyLimitBytes: bodyLimit });
  const store = options.incidents;
  if (store !== undefined && (options.ackLinkSecrets?.length ?? 0) > 0) {
    await app.register(ackLinkRoutes, {
      secrets: [...options.ackLinkSecrets!],
      acknowledge: async (incidentId, by, note) => {
        await store.applyAction({ kind: 'acknowledge', incidentId, by, now: new Date(), ...(note !== undefined && { note }) });
      },
      describe: async (incidentId) => {
        const incident = await store.get(incidentId);
        return incident === undefined ? undefined : ackSummary(incident);
      },
    });
  }
  return app;
}

function ackSummary(incident: Incident): AckIncidentSummary {
  const latest = incident.evidence[0];
  return {
    id: incident.id,
    unit: incident.unit,
    component: incident.component,
    severity: incident.severity,
    state: describeState(incident),
    openedAt: incident.openedAt,
    ...(latest !== undefined && { whatChanged: latest.explanation }),
    ...(incident.acknowledged !== null && { acknowledgedBy: incident.acknowledged.by }),
    closed: incident.closed !== null,
  };
}

export type WearshiftServer = Awaited<ReturnType<typeof buildServer>>;
