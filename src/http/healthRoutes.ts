/**
 * Probes for the orchestrator: `/healthz` says the process is alive (it answers), `/readyz` that it can do
 * its work (Redis answers a PING within the timeout). Neither needs a token: they reveal nothing.
 */
import type { FastifyPluginAsync } from 'fastify';
import { UNAVAILABLE_RETRY_AFTER_S } from './unavailable.ts';

export interface HealthRoutesOptions {
  /** Resolves when Redis answers; a connection without an offline queue fails at once when Redis is away. */
  ping(): Promise<unknown>;
  /** Longest wait for the PING. Default 1000 ms. */
  timeoutMs?: number;
}

export const healthRoutes: FastifyPluginAsync<HealthRoutesOptions> = async (app, options) => {
  const timeoutMs = options.timeoutMs ?? 1000;
  app.get('/healthz', async () => ({ status: 'ok' }));
  app.get('/readyz', async (_request, reply) => {
    let timer: NodeJS.Timeout | undefined;
    try {
      await Promise.race([
        options.ping(),
        new Promise((_, reject) => {
          timer = setTimeout(() => reject(new Error(`no answer within ${timeoutMs} ms`)), timeoutMs);
        }),
      ]);
      return { status: 'ready', redis: 'ok' };
    } catch (e) {
      // The probe says that Redis does not answer, not what the client library said about it.
      const reason = /within \d+ ms/.test((e as Error).message) ? (e as Error).message : 'not answering';
      return reply.code(503).header('retry-after', String(UNAVAILABLE_RETRY_AFTER_S)).send({ status: 'unavailable', redis: reason });
    } finally {
      clearTimeout(timer);
    }
  });
};
