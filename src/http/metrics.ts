/**
 * `GET /metrics` in the Prometheus text format. It needs a viewer (or responder) token, because queue
 * depth and finding counts say something about the fleet; WEARSHIFT_METRICS_PUBLIC=1 opens it for scrapers
 * on a trusted network that cannot send a bearer token.
 */
import type { FastifyPluginAsync } from 'fastify';
import type { Metrics } from '../telemetry/metrics.ts';
import { requireRole, type AccessTokens } from './auth.ts';

export interface MetricsRouteOptions {
  /** The API's bearer tokens. */
  readonly tokens: AccessTokens;
  metrics: Metrics;
  /** Serve without a token (the runtime sets it from WEARSHIFT_METRICS_PUBLIC=1). Default false. */
  public?: boolean;
}

export const metricsRoute: FastifyPluginAsync<MetricsRouteOptions> = async (app, options) => {
  const open = options.public ?? false;
  app.get('/metrics', { ...(!open && { onRequest: requireRole(options.tokens, 'viewer', 'responder') }) }, async (_request, reply) => {
    const text = await options.metrics.registry.metrics();
    return reply.header('content-type', options.metrics.registry.contentType).send(text);
  });
};
