/**
 * A component's trend data over HTTP (fastify 5 plugin), for the viewer role:
 * - `GET /v1/units/:unit/components/:component/series[?measurand=Fe,Cu]`: the series model as JSON;
 * - `GET /v1/units/:unit/components/:component/chart.svg?measurand=Fe[&width=760]`: the trend chart as SVG;
 * - `GET /v1/units/:unit/components/:component/chart.png?measurand=Fe[&width=600]`: the same chart as PNG.
 * Every request builds the component view (src/pipeline/componentView.ts): the evaluation the worker's checkpoints
 * reached, from the same samples, marks, settings and group statistics; the series also says what the analysis
 * cannot judge yet (`readiness`). The evaluation and the drawing run on a chart thread (src/render/chartPool.ts),
 * bounded in time and in number at once: a very long history answers 503 with Retry-After rather than stall the
 * process, and a chart draws at most the pool's sample budget (the latest samples; the heading says so).
 */
import type { FastifyPluginAsync, FastifyReply, FastifyRequest, onRequestAsyncHookHandler } from 'fastify';
import { DEFAULT_CHART_WIDTH } from '../charts/trendChart/trendChart.ts';
import { isMeasurand, type Measurand } from '../domain/measurands.ts';
import type { ChartJob, ChartJobResult } from '../render/chartJob.ts';
import { ChartPool } from '../render/chartPool.ts';
import type { ComponentInput } from '../render/componentInput.ts';
import { ChartUnavailableError } from '../render/errors/chartErrors.ts';
import { requireRole, type AccessTokens } from './auth.ts';

export interface SeriesRoutesOptions {
  /** The API's bearer tokens. */
  readonly tokens: AccessTokens;
  /** What the component's view is computed from; undefined when no such component is known (componentInput.ts). */
  loadInput(unit: string, component: string): Promise<ComponentInput | undefined>;
  /** Where the evaluation and drawing run, off the event loop and bounded. Default: a pool of one thread, closed with the app. */
  pool?: ChartPool;
  /** Guards every route, on request. Default: a viewer or responder bearer token (see auth.ts). */
  authorize?: onRequestAsyncHookHandler;
}

const CHART_WIDTH = { min: 320, max: 2000 };
const PNG_DEFAULT_WIDTH = 600;

const SVG_HEADERS = {
  'content-type': 'image/svg+xml; charset=utf-8',
  'cache-control': 'no-store',
  'x-content-type-options': 'nosniff',
  // The chart carries no script; should one ever be smuggled into a name, opening the SVG on its own runs nothing.
  'content-security-policy': "default-src 'none'; style-src 'unsafe-inline'",
};

interface Params {
  unit: string;
  component: string;
}

type Query = Record<string, string | string[] | undefined>;

export const seriesRoutes: FastifyPluginAsync<SeriesRoutesOptions> = async (app, options) => {
  const onRequest = options.authorize ?? requireRole(options.tokens, 'viewer', 'responder');
  const base = '/v1/units/:unit/components/:component';
  const pool = options.pool ?? new ChartPool();
  if (options.pool === undefined) app.addHook('onClose', async () => pool.close());

  /** Requests reading their history from Redis, not yet handed to the pool. */
  let loading = 0;

  /** Loads the input and runs the job on the pool; answers 404 or 503 itself and then returns undefined. */
  async function compute(request: FastifyRequest<{ Params: Params }>, reply: FastifyReply, job: (input: ComponentInput) => ChartJob): Promise<ChartJobResult | undefined> {
    const { unit, component } = request.params;
    // Refused before its history is read when the pool could not take it anyway: a flood of chart requests for long
    // histories would otherwise read them all from Redis at once, only to be refused as busy afterwards.
    const { running, waiting } = pool.load;
    if (loading + running + waiting >= pool.concurrency + pool.queueLimit) {
      const message = `${running} charts are being drawn, ${waiting} are waiting and ${loading} are being read, the most this process takes; ask again shortly`;
      await reply.code(503).header('retry-after', '2').send({ error: 'unavailable', message });
      return undefined;
    }
    loading++;
    let input: ComponentInput | undefined;
    try {
      input = await options.loadInput(unit, component);
    } finally {
      loading--;
    }
    if (input === undefined) {
      await reply.code(404).send({ error: 'not-found', message: `no component "${component}" of unit "${unit}" is known` });
      return undefined;
    }
    try {
      return await pool.run(job(input));
    } catch (e) {
      if (!(e instanceof ChartUnavailableError)) throw e;
      request.log.warn({ unit, component, reason: e.reason, samples: input.samples.length }, 'chart not drawn');
      await reply.code(503).header('retry-after', String(e.retryAfterS)).send({ error: 'unavailable', message: e.message });
      return undefined;
    }
  }

  app.get<{ Params: Params; Querystring: Query }>(`${base}/series`, { onRequest }, async (request, reply) => {
    const measurands = parseMeasurands(request.query.measurand);
    if (typeof measurands === 'string') return invalidQuery(reply, [{ field: 'query.measurand', message: measurands }]);
    const result = await compute(request, reply, (input) => ({ kind: 'series', input, ...(measurands !== undefined && { measurands }) }));
    if (result === undefined) return reply;
    if (result.kind !== 'series') throw new Error(`unexpected chart result ${result.kind}`);
    return reply.header('cache-control', 'no-store').type('application/json; charset=utf-8').send(result.json);
  });

  const chart = (format: 'svg' | 'png') => async (request: FastifyRequest<{ Params: Params; Querystring: Query }>, reply: FastifyReply) => {
    const measurand = single(request.query.measurand);
    const width = parseWidth(single(request.query.width), format === 'svg' ? DEFAULT_CHART_WIDTH : PNG_DEFAULT_WIDTH);
    // Both parameters judged at once, so that one correction round is enough.
    if (measurand === undefined || !isMeasurand(measurand) || typeof width === 'string') {
      const issues: FieldIssue[] = [];
      if (measurand === undefined) issues.push({ field: 'query.measurand', message: 'required, e.g. ?measurand=Fe' });
      else if (!isMeasurand(measurand)) issues.push({ field: 'query.measurand', message: `unknown measurand "${clip(measurand)}" (names are case-sensitive), e.g. ?measurand=Fe` });
      if (typeof width === 'string') issues.push({ field: 'query.width', message: width });
      return invalidQuery(reply, issues);
    }
    const title = single(request.query.title) !== 'none';
    const result = await compute(request, reply, (input) => ({ kind: 'chart', format, input, measurand, width, title }));
    if (result === undefined) return reply;
    const { unit, component } = request.params;
    if (result.kind === 'no-readings') return reply.code(404).send({ error: 'not-found', message: `no ${measurand} readings for ${unit} / ${component}` });
    if (result.kind === 'svg') return reply.headers(SVG_HEADERS).send(result.svg);
    if (result.kind === 'png') return reply.headers({ 'content-type': 'image/png', 'cache-control': 'no-store', 'x-content-type-options': 'nosniff' }).send(Buffer.from(result.png));
    throw new Error(`unexpected chart result ${result.kind}`);
  };
  app.get<{ Params: Params; Querystring: Query }>(`${base}/chart.svg`, { onRequest }, chart('svg'));
  app.get<{ Params: Params; Querystring: Query }>(`${base}/chart.png`, { onRequest }, chart('png'));
};

interface FieldIssue {
  readonly field: string;
  readonly message: string;
}

/** 400 invalid-request in the API's one shape: every field named in `issues`, and the message lists them. */
function invalidQuery(reply: FastifyReply, issues: readonly FieldIssue[]) {
  return reply.code(400).send({ error: 'invalid-request', message: issues.map((i) => `${i.field}: ${i.message}`).join('; '), issues });
}

/** A query value as an answer echoes it: at most 40 characters. */
function clip(s: string): string {
  return s.length > 40 ? `${s.slice(0, 40)}…` : s;
}

/** A query parameter given more than once counts by its first value, for parameters that take one. */
function single(raw: string | string[] | undefined): string | undefined {
  return Array.isArray(raw) ? raw[0] : raw;
}

/**
 * "Fe,Cu" (or `measurand=Fe&measurand=Cu`) → the measurands; the reason when one is unknown (the field is
 * `query.measurand`); undefined when absent.
 */
function parseMeasurands(raw: string | string[] | undefined): Measurand[] | string | undefined {
  const joined = Array.isArray(raw) ? raw.join(',') : raw;
  if (joined === undefined || joined.trim() === '') return undefined;
  const names = joined.split(',').map((s) => s.trim()).filter((s) => s !== '');
  const unknown = names.filter((n) => !isMeasurand(n));
  if (unknown.length > 0) {
    const named = unknown.slice(0, 5).map((n) => `"${clip(n)}"`).join(', ');
    return `unknown measurand${unknown.length > 1 ? 's' : ''} ${named}${unknown.length > 5 ? ` and ${unknown.length - 5} more` : ''} (names are case-sensitive, e.g. Fe, tbn)`;
  }
  return [...new Set(names as Measurand[])];
}

function parseWidth(raw: string | undefined, fallback: number): number | string {
  if (raw === undefined) return fallback;
  const n = Number(raw);
  if (raw.trim() === '' || !Number.isInteger(n) || n < CHART_WIDTH.min || n > CHART_WIDTH.max) return `expected a whole number of pixels from ${CHART_WIDTH.min} to ${CHART_WIDTH.max}, got "${clip(raw)}"`;
  return n;
}
