/**
 * `POST /v1/results`: one result event, an array of them (application/json), or one per line
 * (application/x-ndjson). Every record gets an outcome; valid records are enqueued even when others in the
 * same request are rejected. 202 when at least one record was accepted, 422 when none was (same body);
 * 413 above the body limit or above `maxRecords` records (the message names the limit; nothing was accepted);
 * 503 with Retry-After when the queue cannot take the records or does not answer within the command timeout: the
 * producer writes a batch in parts, so the parts before the failure are on the queue and, after a timeout, the part at
 * hand may yet arrive; sending the whole request again is harmless, a result sent twice is stored once (see
 * `WRITE_PART_RECORDS` in src/queue/producer.ts). The reply stays small whatever is sent:
 * the first `detailedRejections` rejected records list up to `ISSUES_PER_DETAILED_RECORD` problems each, later ones their
 * first `ISSUES_PER_RECORD`, and `moreErrors` counts the rest (a record's problems are bounded too: see parseResultEvent).
 */
import type { FastifyError, FastifyPluginAsync } from 'fastify';
import type { RecordOutcome } from '../intake/validate.ts';
import type { Metrics } from '../telemetry/metrics.ts';
import { requireRole, type AccessTokens } from './auth.ts';
import { DEFAULT_HTTP_LIMITS, formatBytes } from './limits.ts';
import { UNAVAILABLE_RETRY_AFTER_S } from './unavailable.ts';
import { clientError } from './clientErrors.ts';

export interface ResultRoutesOptions {
  /** The API's bearer tokens. */
  readonly tokens: AccessTokens;
  /** Validates and enqueues; the producer of src/queue/producer.ts. */
  producer: { add(events: unknown): Promise<RecordOutcome[]> };
  metrics?: Metrics;
  /** Largest request body in bytes. Default 5 MiB. */
  bodyLimitBytes?: number;
  /** Most records in one request. Default 5 000 (limits.ts). */
  maxRecords?: number;
  /** Rejected records that list up to `ISSUES_PER_DETAILED_RECORD` problems; later ones list `ISSUES_PER_RECORD`. Default 100. */
  detailedRejections?: number;
}

export const DEFAULT_BODY_LIMIT_BYTES = DEFAULT_HTTP_LIMITS.bodyLimitBytes;
/** Problems listed per rejected record beyond the first `detailedRejections` ones (the rest are counted). */
export const ISSUES_PER_RECORD = 3;
/** Problems listed per rejected record among the first `detailedRejections` ones (the rest are counted). */
export const ISSUES_PER_DETAILED_RECORD = 20;

const NDJSON = 'application/x-ndjson';

/** One NDJSON line: parsed, or the reason it is not JSON. */
type NdjsonLine = { line: number; ok: true; value: unknown } | { line: number; ok: false; reason: string };

class NdjsonBody {
  constructor(
    readonly lines: NdjsonLine[],
    /** More non-empty lines than the record limit: parsing stopped there. */
    readonly overflow: boolean,
  ) {}
}

export const resultRoutes: FastifyPluginAsync<ResultRoutesOptions> = async (app, options) => {
  const bodyLimit = options.bodyLimitBytes ?? DEFAULT_BODY_LIMIT_BYTES;
  const maxRecords = options.maxRecords ?? DEFAULT_HTTP_LIMITS.maxRecordsPerRequest;
  const detailed = options.detailedRejections ?? 100;
  const tooMany = (count: string) => ({
    error: 'too-many-records',
    message: `the request holds ${count} records, more than the limit of ${maxRecords} per request; nothing was accepted, send them in batches of at most ${maxRecords}`,
    maxRecords,
  });

  app.addContentTypeParser(NDJSON, { parseAs: 'string', bodyLimit }, (_req, body, done) => {
    const lines: NdjsonLine[] = [];
    const text = String(body);
    let start = 0;
    for (let n = 1; start <= text.length; n++) {
      const end = text.indexOf('\n', start);
      const line = text.slice(start, end === -1 ? text.length : end);
      start = end === -1 ? text.length + 1 : end + 1;
      if (line.trim() === '') continue;
      // Counting stops at the first line over the limit: the request is refused whole, so the rest is not parsed.
      if (lines.length === maxRecords) return done(null, new NdjsonBody(lines, true));
      try {
        lines.push({ line: n, ok: true, value: JSON.parse(line) });
      } catch (e) {
        lines.push({ line: n, ok: false, reason: `not valid JSON: ${(e as Error).message.slice(0, 200)}` });
      }
    }
    done(null, new NdjsonBody(lines, false));
  });

  app.setErrorHandler((error: FastifyError, request, reply) => {
    if (error.code === 'FST_ERR_CTP_BODY_TOO_LARGE') {
      return reply.code(413).send({ error: 'payload-too-large', message: `the request body exceeds the limit of ${formatBytes(bodyLimit)}; send the results in smaller batches`, maxBytes: bodyLimit });
    }
    const refused = clientError(error, request);
    if (refused !== undefined) return reply.code(refused.status).send(refused.body);
    request.log.error({ err: error }, 'result intake failed');
    return reply.code(500).send({ error: 'internal', message: 'the results could not be taken; nothing was accepted' });
  });

  app.post('/v1/results', { bodyLimit, onRequest: requireRole(options.tokens, 'ingest') }, async (request, reply) => {
    const body = request.body;
    if (body instanceof NdjsonBody && body.overflow) return reply.code(413).send(tooMany(`more than ${maxRecords}`));
    if (Array.isArray(body) && body.length > maxRecords) return reply.code(413).send(tooMany(String(body.length)));
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
      return reply
        .code(503)
        .header('retry-after', String(UNAVAILABLE_RETRY_AFTER_S))
        .send({ error: 'unavailable', message: `the results queue is unavailable; send the records again in ${UNAVAILABLE_RETRY_AFTER_S} s (a result sent twice is stored once)` });
    }
    const byPosition = new Map(parsed.map((r, i) => [r.position, enqueued[i]!]));
    let rejections = 0;
    const outcomes: (RecordOutcome & { line?: number; moreErrors?: number })[] = records.map((r) => {
      const line = r.line === undefined ? {} : { line: r.line };
      const outcome: RecordOutcome =
        r.notJson !== undefined ? { index: r.position, ...line, status: 'rejected', errors: [{ path: '', reason: r.notJson }] } : { ...byPosition.get(r.position)!, index: r.position, ...line };
      if (outcome.status !== 'rejected') return outcome;
      const errors = outcome.errors ?? [];
      const listed = ++rejections <= detailed ? ISSUES_PER_DETAILED_RECORD : ISSUES_PER_RECORD;
      if (errors.length <= listed) return outcome;
      return { ...outcome, errors: errors.slice(0, listed), moreErrors: errors.length - listed };
    });
    const accepted = outcomes.filter((o) => o.status === 'accepted').length;
    options.metrics?.accepted('http', accepted);
    for (const o of outcomes) if (o.status === 'rejected') options.metrics?.rejected('http', o.errors ?? []);
    // Nothing accepted and every refusal a revision conflict: 409, as for any other conflict with what is stored.
    const allConflicts = accepted === 0 && outcomes.every((o) => o.conflict === true);
    return reply.code(accepted > 0 ? 202 : allConflicts ? 409 : 422).send(outcomes);
  });
};
