/**
 * `POST /v1/results`: one result event, an array of them (application/json), or one per line
 * (application/x-ndjson). Every record gets an outcome; valid records are enqueued even when others in the
 * same request are rejected. 202 when at least one record was accepted, 422 when none was (same body);
 * 413 above the body limit; 503 when the queue cannot take the records (then none was accepted).
 */
import type { FastifyError, FastifyPluginAsync } from 'fastify';
import type { RecordOutcome } from '../intake/validate.ts';
import type { Metrics } from '../telemetry/metrics.ts';
import { requireRole } from './auth.ts';

export interface ResultRoutesOptions {
  /** Validates and enqueues; the producer of src/queue/producer.ts. */
  producer: { add(events: unknown): Promise<RecordOutcome[]> };
  metrics?: Metrics;
  /** Largest request body in bytes. Default 5 MiB. */
  bodyLimitBytes?: number;
}

export const DEFAULT_BODY_LIMIT_BYTES = 5 * 1024 * 1024;

const NDJSON = 'application/x-ndjson';

/** One NDJSON line: parsed, or the reason it is not JSON. */
type NdjsonLine = { line: number; ok: true; value: unknown } | { line: number; ok: false; reason: string };

class NdjsonBody {
  constructor(readonly lines: NdjsonLine[]) {}
}

export const resultRoutes: FastifyPluginAsync<ResultRoutesOptions> = async (app, options) => {
  const bodyLimit = options.bodyLimitBytes ?? DEFAULT_BODY_LIMIT_BYTES;

  app.addContentTypeParser(NDJSON, { parseAs: 'string', bodyLimit }, (_req, body, done) => {
    const lines: NdjsonLine[] = [];
    String(body)
      .split('\n')
      .forEach((text, i) => {
        if (text.trim() === '') return;
        try {
          lines.push({ line: i + 1, ok: true, value: JSON.parse(text) });
        } catch (e) {
          lines.push({ line: i + 1, ok: false, reason: `not valid JSON: ${(e as Error).message}` });
        }
      });
    done(null, new NdjsonBody(lines));
  });

  app.setErrorHandler((error: FastifyError, request, reply) => {
    if (error.code === 'FST_ERR_CTP_BODY_TOO_LARGE') {
      return reply.code(413).send({ error: 'payload-too-large', message: `the request body exceeds the limit of ${formatBytes(bodyLimit)}; send the results in smaller batches` });
    }
    if (error.statusCode !== undefined && error.statusCode >= 400 && error.statusCode < 500) {
      return reply.code(error.statusCode).send({ error: 'bad-request', message: error.message });
    }
    request.log.error({ err: error }, 'result intake failed');
    return reply.code(500).send({ error: 'internal', message: 'the results could not be taken; nothing was accepted' });
  });

  app.post('/v1/results', { bodyLimit, onRequest: requireRole('ingest') }, async (request, reply) => {
    const body = request.body;
    const records: { position: number; line?: number; value?: unknown; notJson?: string }[] =
      body instanceof NdjsonBody
        ? body.lines.map((l, i) => (l.ok ? { position: i, line: l.line, value: l.value } : { position: i, line: l.line, notJson: l.reason }))
        : (Array.isArray(body) ? body : [body]).map((value, i) => ({ position: i, value }));
    if (body === undefined || records.length === 0) {
      return reply.code(400).send({ error: 'bad-request', message: 'the body holds no result: send one event, an array, or NDJSON lines' });
    }
    const parsed = records.filter((r) => r.notJson === undefined);
    let enqueued: RecordOutcome[];
    try {
      enqueued = await options.producer.add(parsed.map((r) => r.value));
    } catch (e) {
      request.log.error({ err: (e as Error).message }, 'results queue unavailable');
      return reply.code(503).header('retry-after', '5').send({ error: 'unavailable', message: 'the results queue is unavailable; nothing was accepted, send again later' });
    }
    const byPosition = new Map(parsed.map((r, i) => [r.position, enqueued[i]!]));
    const outcomes: (RecordOutcome & { line?: number })[] = records.map((r) => {
      const line = r.line === undefined ? {} : { line: r.line };
      if (r.notJson !== undefined) return { index: r.position, ...line, status: 'rejected', errors: [{ path: '', reason: r.notJson }] };
      return { ...byPosition.get(r.position)!, index: r.position, ...line };
    });
    const accepted = outcomes.filter((o) => o.status === 'accepted').length;
    options.metrics?.accepted('http', accepted);
    for (const o of outcomes) if (o.status === 'rejected') options.metrics?.rejected('http', o.errors ?? []);
    return reply.code(accepted > 0 ? 202 : 422).send(outcomes);
  });
};

function formatBytes(n: number): string {
  return n % (1024 * 1024) === 0 ? `${n / (1024 * 1024)} MB` : n % 1024 === 0 ? `${n / 1024} kB` : `${n} bytes`;
}
