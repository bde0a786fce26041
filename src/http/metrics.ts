/**
 * `GET /metrics` in the Prometheus text format. It needs a viewer (or responder) token, because queue
 * depth and finding counts say something about the fleet; WEARSHIFT_METRICS_PUBLIC=1 opens it for scrapers
 * on a trusted network that cannot send a bearer token.
 */
import type { FastifyPluginAsync } from 'fastify';
import type { Metrics } from '../telemetry/metrics.ts';
import { requireRole } from './auth.ts';

export interface MetricsRouteOptions {
  metrics: Metrics;
  /** Serve without a token. Default: WEARSHIFT_METRICS_PUBLIC === '1'. */
  public?: boolean;
}

export const metricsRoute: FastifyPluginAsync<MetricsRouteOptions> = async (app, options) => {
  const open = options.public ?? process.env.WEARSHIFT_METRICS_PUBLIC === '1';
  app.get('/metrics', { ...(!open && { onRequest: requireRole('viewer', 'responder') }) }, async (_request, reply) => {
    const text = await options.metrics.registry.metrics();
    return reply.header('content-type', options.metrics.registry.contentType).send(text);
  });
};
