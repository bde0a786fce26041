/**
 * `GET /openapi.json`: the OpenAPI 3.1 document of this API, without a token. The document describes these routes
 * (src/contracts/openapi.ts builds it from their schemas), so the process wiring hands it in.
 */
import type { FastifyPluginAsync } from 'fastify';

export interface ContractRoutesOptions {
  /** The OpenAPI document to serve. */
  readonly openApi: object;
}

export const contractRoutes: FastifyPluginAsync<ContractRoutesOptions> = async (app, options) => {
  const text = JSON.stringify(options.openApi);
  app.get('/openapi.json', async (_request, reply) => reply.header('content-type', 'application/json; charset=utf-8').header('cache-control', 'public, max-age=300').send(text));
};
