/**
 * The HTTP API: one fastify application with the probes and the metrics, and — for what is given — the
 * result intake, the incident API and acknowledgement-link pages, the component series and charts, and the
 * live event stream. JSON in and out; bearer tokens per role (auth.ts).
 */
import Fastify from 'fastify';
import type { Config } from '../domain/config.ts';
import { describeState, type Incident } from '../incidents/model.ts';
import type { IncidentRoutesStore } from './incidentRoutes.ts';
import type { AckIncidentSummary } from '../notify/ackPage.ts';
import type { Logger } from '../telemetry/logger.ts';
import type { Metrics } from '../telemetry/metrics.ts';
import { componentView } from '../pipeline/componentView.ts';
import type { ComponentStore, GroupLedger } from '../pipeline/ports.ts';
import { ackLinkRoutes } from './ackLinkRoutes.ts';
import { announcingActions, type EventHub, type LiveEvent } from './eventHub.ts';
import { eventRoutes } from './eventRoutes.ts';
import { boardRoutes } from './boardRoutes.ts';
import { contractRoutes } from './contractRoutes.ts';
import { healthRoutes } from './healthRoutes.ts';
import { incidentRoutes } from './incidentRoutes.ts';
import { metricsRoute } from './metrics.ts';
import { DEFAULT_BODY_LIMIT_BYTES, resultRoutes, type ResultRoutesOptions } from './resultRoutes.ts';
import { seriesRoutes } from './seriesRoutes.ts';
import { sampleVerdictRoutes, type SampleVerdictTaker } from './sampleVerdictRoutes.ts';

export interface ServerOptions {
  readonly logger: Logger;
  readonly metrics: Metrics;
  /** Readiness check: resolves when Redis answers. */
  ping(): Promise<unknown>;
  /** The result intake; without it, no POST /v1/results (a worker's metrics port). */
  readonly producer?: ResultRoutesOptions['producer'];
  /** Largest request body in bytes. Default 5 MiB. */
  readonly bodyLimitBytes?: number;
  /** Serve /metrics without a token. Default: WEARSHIFT_METRICS_PUBLIC === '1'. */
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
}

export async function buildServer(options: ServerOptions) {
  const bodyLimit = options.bodyLimitBytes ?? DEFAULT_BODY_LIMIT_BYTES;
  const app = Fastify({ loggerInstance: options.logger, bodyLimit });
  await app.register(healthRoutes, { ping: options.ping });
  if (options.openApi !== undefined) await app.register(contractRoutes, { openApi: options.openApi });
  await app.register(metricsRoute, { metrics: options.metrics, ...(options.metricsPublic !== undefined && { public: options.metricsPublic }) });
  if (options.producer !== undefined) await app.register(resultRoutes, { producer: options.producer, metrics: options.metrics, bodyLimitBytes: bodyLimit });
  if (options.hub !== undefined) await app.register(eventRoutes, { hub: options.hub });
  const histories = options.histories;
  if (histories !== undefined) {
    await app.register(seriesRoutes, {
      loadComponent: (unit, component) => componentView(histories.store, histories.ledger, histories.config, { unit, component }),
    });
  }
  if (options.sampleVerdicts !== undefined) await app.register(sampleVerdictRoutes, { verdicts: options.sampleVerdicts });
  // Acknowledgements from the API, the board or an e-mail link are announced like the worker's incident changes.
  const store = options.incidents && (options.announce ? announcingActions(options.incidents, options.announce) : options.incidents);
  if (store !== undefined) await app.register(incidentRoutes, { store });
  if (options.producer !== undefined) await app.register(boardRoutes, { ...(options.timeZone !== undefined && { timeZone: options.timeZone }) });
  if (store !== undefined && (options.ackLinkSecrets?.length ?? 0) > 0) {
    await app.register(ackLinkRoutes, {
      secrets: [...options.ackLinkSecrets!],
      acknowledge: async (incidentId, by, note) => {
        await store.applyAction({ kind: 'acknowledge', incidentId, by, now: new Date(), ...(note !== undefined && { note }) });
      },
      describe: async (incidentId) => {
        const incident = await store.get(incidentId);
        return incident === undefined ? undefined : ackSummary(incident, options.timeZone);
      },
    });
  }
  return app;
}

/** The incident as the acknowledgement pages show it. */
export function ackSummary(incident: Incident, timeZone: string | undefined): AckIncidentSummary {
  const latest = incident.evidence[0];
  return {
    id: incident.id,
    unit: incident.unit,
    component: incident.component,
    severity: incident.severity,
    peakSeverity: incident.peakSeverity,
    state: describeState(incident),
    ...(timeZone !== undefined && { timeZone }),
    openedAt: incident.openedAt,
    ...(latest !== undefined && { whatChanged: latest.explanation }),
    ...(incident.acknowledged !== null && { acknowledgedBy: incident.acknowledged.by }),
    closed: incident.closed !== null,
  };
}

export type WearshiftServer = Awaited<ReturnType<typeof buildServer>>;
