/**
 * A component's trend data over HTTP (fastify 5 plugin), for the viewer role:
 * - `GET /v1/units/:unit/components/:component/series[?measurand=Fe,Cu]`: the series model as JSON;
 * - `GET /v1/units/:unit/components/:component/chart.svg?measurand=Fe[&width=760]`: the trend chart as SVG;
 * - `GET /v1/units/:unit/components/:component/chart.png?measurand=Fe[&width=600]`: the same chart as PNG.
 * Every request builds the component view (src/pipeline/componentView.ts): the evaluation the worker's checkpoints
 * reached, from the same samples, marks, settings and group statistics; the series also says what the analysis
 * cannot judge yet (`readiness`).
 */
import type { FastifyPluginAsync, FastifyReply, FastifyRequest, preHandlerAsyncHookHandler } from 'fastify';
import { renderChartPng } from '../charts/chartPng.ts';
import { buildComponentSeries, type ComponentSeries } from '../charts/componentSeries.ts';
import { DEFAULT_CHART_WIDTH, renderTrendChart } from '../charts/trendChart.ts';
import { isMeasurand, type Measurand } from '../domain/measurands.ts';
import type { ComponentView } from '../pipeline/componentView.ts';
import { requireRole } from './auth.ts';

export interface SeriesRoutesOptions {
  /** The component view (history, settings, group statistics, evaluation); undefined when no such component is known. */
  loadComponent(unit: string, component: string): Promise<ComponentView | undefined>;
  /** Guards every route. Default: a viewer or responder bearer token (see auth.ts). */
  authorize?: preHandlerAsyncHookHandler;
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

type Query = Record<string, string | undefined>;

export const seriesRoutes: FastifyPluginAsync<SeriesRoutesOptions> = async (app, options) => {
  const preHandler = options.authorize ?? requireRole('viewer', 'responder');
  const base = '/v1/units/:unit/components/:component';

  async function load(request: FastifyRequest<{ Params: Params }>, reply: FastifyReply, measurands?: Measurand[]): Promise<(ComponentSeries & Pick<ComponentView, 'readiness'>) | undefined> {
    const { unit, component } = request.params;
    const view = await options.loadComponent(unit, component);
    if (view === undefined) {
      await reply.code(404).send({ error: 'not-found', message: `no component "${component}" of unit "${unit}" is known` });
      return undefined;
    }
    const series = buildComponentSeries(view.evaluation, view.settings, view.group, measurands === undefined ? {} : { measurands });
    return { ...series, readiness: view.readiness };
  }

  app.get<{ Params: Params; Querystring: Query }>(`${base}/series`, { preHandler }, async (request, reply) => {
    const measurands = parseMeasurands(request.query.measurand);
    if (typeof measurands === 'string') return reply.code(400).send({ error: 'invalid-request', message: measurands });
    const series = await load(request, reply, measurands);
    if (series === undefined) return reply;
    return reply.header('cache-control', 'no-store').send(series);
  });

  const chart = (format: 'svg' | 'png') => async (request: FastifyRequest<{ Params: Params; Querystring: Query }>, reply: FastifyReply) => {
    const measurand = request.query.measurand;
    if (measurand === undefined || !isMeasurand(measurand)) {
      return reply.code(400).send({ error: 'invalid-request', message: `measurand: ${measurand === undefined ? 'required' : `unknown measurand "${measurand}"`}, e.g. ?measurand=Fe` });
    }
    const width = parseWidth(request.query.width, format === 'svg' ? DEFAULT_CHART_WIDTH : PNG_DEFAULT_WIDTH);
    if (typeof width === 'string') return reply.code(400).send({ error: 'invalid-request', message: width });
    const series = await load(request, reply, [measurand]);
    if (series === undefined) return reply;
    const m = series.measurands[0]!;
    if (m.charges.every((c) => c.points.length === 0) && (m.cleanliness?.points.length ?? 0) === 0) {
      return reply.code(404).send({ error: 'not-found', message: `no ${measurand} readings for ${series.unit} / ${series.component}` });
    }
    const svg = renderTrendChart(series, measurand, { width, ...(request.query.title === 'none' && { title: false as const }) });
    if (format === 'svg') return reply.headers(SVG_HEADERS).send(svg);
    return reply.headers({ 'content-type': 'image/png', 'cache-control': 'no-store', 'x-content-type-options': 'nosniff' }).send(renderChartPng(svg, width));
  };
  app.get<{ Params: Params; Querystring: Query }>(`${base}/chart.svg`, { preHandler }, chart('svg'));
  app.get<{ Params: Params; Querystring: Query }>(`${base}/chart.png`, { preHandler }, chart('png'));
};

/** "Fe,Cu" → the measurands; an error message naming the field when one is unknown; undefined when absent. */
function parseMeasurands(raw: string | undefined): Measurand[] | string | undefined {
  if (raw === undefined || raw.trim() === '') return undefined;
  const names = raw.split(',').map((s) => s.trim());
  const unknown = names.filter((n) => !isMeasurand(n));
  if (unknown.length > 0) return `measurand: unknown measurand${unknown.length > 1 ? 's' : ''} ${unknown.map((n) => `"${n}"`).join(', ')}`;
  return [...new Set(names as Measurand[])];
}

function parseWidth(raw: string | undefined, fallback: number): number | string {
  if (raw === undefined) return fallback;
  const n = Number(raw);
  if (!Number.isInteger(n) || n < CHART_WIDTH.min || n > CHART_WIDTH.max) return `width: expected a whole number of pixels from ${CHART_WIDTH.min} to ${CHART_WIDTH.max}, got "${raw}"`;
  return n;
}
