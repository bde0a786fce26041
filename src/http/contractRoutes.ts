/** `GET /openapi.json`: the OpenAPI 3.1 document of this API (src/contracts/openapi.ts), without a token. */
import type { FastifyPluginAsync } from 'fastify';
import { openApiDocument } from '../contracts/openapi.ts';

export const contractRoutes: FastifyPluginAsync = async (app) => {
  const text = JSON.stringify(openApiDocument());
  app.get('/openapi.json', async (_request, reply) => reply.header('content-type', 'application/json; charset=utf-8').header('cache-control', 'public, max-age=300').send(text));
};
