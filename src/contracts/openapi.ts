/**
 * The OpenAPI 3.1 document of the HTTP API, generated from the zod schemas the routes validate with (the result
 * event, the incident filter, the action bodies) and the answer schemas in responseSchemas.ts. OpenAPI 3.1 uses
 * JSON Schema 2020-12, which is what zod writes, so the schemas go in unchanged. Served at GET /openapi.json and
 * written to schemas/openapi.json by `wearshift schema`.
 */
import { z } from 'zod';
import { ResultEventSchema } from '../domain/event.ts';
import { IncidentListQuerySchema } from '../incidents/listPage.ts';
import { VerdictBodySchema } from '../http/sampleVerdictRoutes.ts';
import { INCIDENT_ACTION_BODIES } from '../http/incidentRoutes.ts';
import { ErrorBodySchema, HealthSchema, SessionSchema, IncidentEnvelopeSchema, IncidentListSchema, ResultOutcomesSchema, SeriesSchema } from './responseSchemas.ts';

export const API_VERSION = '1';

const CHART_UNAVAILABLE = 'The chart threads are busy (more requests wait than the queue holds), the chart took longer than its limit, or the store is away; try again after Retry-After.';

type Json = Record<string, unknown>;

/** A zod schema as a JSON Schema for a component: no `$schema`, definitions inlined. */
function schemaOf(schema: z.ZodType, io: 'input' | 'output'): Json {
  const { $schema: _drop, ...rest } = z.toJSONSchema(schema, { io, unrepresentable: 'any' }) as Json;
  return rest;
}

const ref = (name: string) => ({ $ref: `#/components/schemas/${name}` });
const json = (name: string) => ({ 'application/json': { schema: ref(name) } });
const error = (description: string) => ({ description, content: json('Error') });
/** A 503 with the Retry-After header (seconds). */
const unavailable = (description: string) => ({ description, headers: { 'Retry-After': { $ref: '#/components/headers/RetryAfter' } }, content: json('Error') });
/** Too many unknown tokens from the client's address within the window: every request with a token waits. */
const GUESSING = {
  '429': {
    description: 'Too many unknown tokens were presented from this address (20 a minute by default); every request with a token from it is refused (too-many-requests) until Retry-After.',
    headers: { 'Retry-After': { $ref: '#/components/headers/RetryAfter' } },
    content: json('Error'),
  },
};
const AUTH_ERRORS = {
  '401': error('No or unknown bearer token (answered before the body is read).'),
  '403': error("The token's role does not permit this (answered before the body is read)."),
  ...GUESSING,
};
/** Redis away or not answering within the command timeout (2 s): nothing was changed. */
const STORE_UNAVAILABLE = { '503': unavailable('The store (Redis) is away or did not answer within 2 s; nothing was changed. Retry after Retry-After (5 s).') };
/** What every route with a path parameter may answer before the route runs. */
const PATH_ERRORS = { '414': error('A path parameter is longer than 2 304 characters (uri-too-long).') };
/** What every route that takes a JSON body may answer before the route runs. */
const BODY_ERRORS = {
  '413': error('The body exceeds the limit (5 MB by default; payload-too-large with `maxBytes`).'),
  '415': error('A content type the route does not take (unsupported-media-type; `accepted` names those it takes).'),
};

const VERB_TEXT: Record<keyof typeof INCIDENT_ACTION_BODIES, string> = {
  ack: 'Acknowledge (ISA-18.2): someone owns it; escalation stops. Acknowledging a returned incident closes it.',
  shelve: 'Shelve until a time, with a reason: no escalation meanwhile.',
  unshelve: 'End a shelving early.',
  resolve: 'Close by hand, with a note.',
  note: 'Add a note to the timeline.',
};

/** Query parameters from the filter schema: one parameter per field. */
function queryParameters(schema: z.ZodObject): Json[] {
  const js = schemaOf(schema, 'input') as { properties?: Record<string, Json>; required?: string[] };
  return Object.entries(js.properties ?? {}).map(([name, s]) => ({ name, in: 'query', required: (js.required ?? []).includes(name), schema: s, ...(typeof s.description === 'string' && { description: s.description }) }));
}

export function openApiDocument(): Json {
  const component = [
    { name: 'unit', in: 'path', required: true, schema: { type: 'string' } },
    { name: 'component', in: 'path', required: true, schema: { type: 'string' } },
  ];
  const chartTitle = { name: 'title', in: 'query', required: false, description: '"none" leaves out the heading (the board\u2019s cards show their own); otherwise the chart has one.', schema: { type: 'string' } };
  const incidentId = { name: 'id', in: 'path', required: true, description: 'The incident id, percent-encoded (it contains "/").', schema: { type: 'string' } };
  const actions = Object.fromEntries(
    (Object.keys(INCIDENT_ACTION_BODIES) as (keyof typeof INCIDENT_ACTION_BODIES)[]).map((verb) => [
      `/v1/incidents/{id}/${verb}`,
      {
        post: {
          operationId: `${verb}Incident`,
          summary: VERB_TEXT[verb],
          tags: ['incidents'],
          security: [{ bearer: ['responder'] }],
          parameters: [incidentId],
          requestBody: { required: true, content: json(`${verb[0]!.toUpperCase()}${verb.slice(1)}Body`) },
          responses: {
            '200': { description: 'The incident after the action.', content: json('IncidentEnvelope') },
            '400': error('A field is missing or invalid (invalid-request, naming it), or the body is not JSON (bad-request).'),
            ...AUTH_ERRORS,
            '404': error('No such incident.'),
            '409': {
              description:
                'The incident changed meanwhile or the action does not apply to its state. With Retry-After (5 s): the incident is being judged again with results that arrived before the sample that opened it; the same action is likely to be taken then.',
              headers: { 'Retry-After': { $ref: '#/components/headers/RetryAfter' } },
              content: json('Error'),
            },
            ...BODY_ERRORS,
            ...PATH_ERRORS,
            ...STORE_UNAVAILABLE,
          },
        },
      },
    ]),
  );
  return {
    openapi: '3.1.0',
    info: {
      title: 'wearshift HTTP API',
      version: API_VERSION,
      description:
        'Lab results in; incidents, component series and live events out. Bearer tokens by role (ingest, responder, viewer). wearshift advises: the laboratory\u2019s diagnosis, the equipment maker\u2019s limits, local codes and licensed practice decide.',
    },
    jsonSchemaDialect: 'https://json-schema.org/draft/2020-12/schema',
    servers: [{ url: '/' }],
    tags: [{ name: 'results' }, { name: 'incidents' }, { name: 'components' }, { name: 'operations' }],
    paths: {
      '/v1/results': {
        post: {
          operationId: 'postResults',
          summary: 'One result event, an array of them, or NDJSON lines; every record gets an outcome.',
          tags: ['results'],
          security: [{ bearer: ['ingest'] }],
          requestBody: {
            required: true,
            content: {
              'application/json': { schema: { oneOf: [ref('ResultEvent'), { type: 'array', items: ref('ResultEvent') }] } },
              'application/x-ndjson': { schema: { type: 'string', description: 'One result event per line.' } },
            },
          },
          responses: {
            '202': { description: 'At least one record was accepted (rejected ones carry their errors).', content: json('ResultOutcomes') },
            '400': error('The body holds no result, or is not JSON (bad-request).'),
            ...AUTH_ERRORS,
            '409': { description: 'No record was accepted and every one was refused as a conflict: the same sampleId and revision is already stored with other content (a correction needs a higher revision).', content: json('ResultOutcomes') },
            '413': error('The body exceeds the limit (5 MB by default; `maxBytes`), or holds more records than one request may (5 000 by default; error too-many-records, `maxRecords`). Nothing was accepted.'),
            '415': BODY_ERRORS['415'],
            '422': { description: 'No record was accepted.', content: json('ResultOutcomes') },
            '503': unavailable('The results queue is unavailable, or Redis did not answer within the command timeout (2 s); send the records again after Retry-After (a result sent twice is stored once).'),
          },
        },
      },
      '/v1/incidents': {
        get: {
          operationId: 'listIncidents',
          summary: 'Incidents: open ones most severe first, then the most recently opened; closed ones the most recently closed first.',
          description:
            'One page at a time: `next` is a cursor while more incidents may match, and `cursor` continues strictly after the previous page in the same order (ties by id), without repeating or skipping an incident: one opened meanwhile shows where the order places it, once, or not at all when that is before the cursor. An incident whose severity or state changed between pages moves to its new place in the order. A cursor is bound to the state, severity, unit and group it was given for; with others, or altered, it is refused (400 naming `query.cursor`). A filtered list (severity, unit, group, a state within the open ones) reads at most 2 000 incident records per request by default: a page that reached that bound ends early, with fewer than `limit` incidents or none, and `next` continues after the last record read; follow `next` until it is null.',
          tags: ['incidents'],
          security: [{ bearer: ['viewer'] }, { bearer: ['responder'] }],
          // A repeated severity means the list (the routes join it); any other parameter takes one value.
          parameters: queryParameters(IncidentListQuerySchema).map((p) => (p.name === 'severity' ? { ...p, description: `${String(p.description ?? '')} The parameter may also be repeated (severity=alarm&severity=watch).`.trim() } : p)),
          responses: {
            '200': { description: 'The incidents that match.', content: json('IncidentList') },
            '400': error('A query parameter is invalid, given more than once, or a cursor is malformed or was given for another filter (issues name the parameter, such as query.cursor).'),
            ...AUTH_ERRORS,
            '503': unavailable(
              'The store (Redis) is away or did not answer within 2 s (Retry-After 5 s); or, for a filtered list (severity, unit, group, a state within the open ones), as many such lists are being read as the process reads at once (4 by default; Retry-After 1 s).',
            ),
          },
        },
      },
      '/v1/incidents/{id}': {
        get: {
          operationId: 'getIncident',
          summary: 'One incident with its timeline.',
          tags: ['incidents'],
          security: [{ bearer: ['viewer'] }, { bearer: ['responder'] }],
          parameters: [incidentId],
          responses: {
            '200': { description: 'The incident.', content: json('IncidentEnvelope') },
            ...AUTH_ERRORS,
            '404': error('No such incident (an id sent without percent-encoding matches no route and is told so).'),
            ...PATH_ERRORS,
            ...STORE_UNAVAILABLE,
          },
        },
      },
      ...actions,
      '/v1/units/{unit}/components/{component}/series': {
        get: {
          operationId: 'getSeries',
          summary: 'Chart data of a component.',
          tags: ['components'],
          security: [{ bearer: ['viewer'] }, { bearer: ['responder'] }],
          parameters: [...component, { name: 'measurand', in: 'query', required: false, description: 'Comma-separated measurands (or the parameter repeated); default all.', schema: { type: 'string' } }],
          responses: {
            '200': { description: 'The series.', content: json('Series') },
            '400': error('Unknown measurand (invalid-request; issues name query.measurand).'),
            ...AUTH_ERRORS,
            '404': error('No such component.'),
            ...PATH_ERRORS,
            '503': unavailable(CHART_UNAVAILABLE),
          },
        },
      },
      '/v1/units/{unit}/components/{component}/samples/{sampleId}/verdict': {
        post: {
          operationId: 'judgeSample',
          summary: 'A responder\u2019s word on a sample a sampling finding put in doubt: confirmed (back into the trend), rejected (kept out); on a sample at which EWMA or CUSUM signal a rise: usual-rate (the rate is the component\u2019s usual one, its change detectors learn a new baseline from there); or withdrawn (an earlier word taken back). The component is evaluated again from it, and who gave the word, and when, shows in the timeline of every incident that holds the sample.',
          tags: ['components'],
          security: [{ bearer: ['responder'] }],
          parameters: [...component, { name: 'sampleId', in: 'path', required: true, schema: { type: 'string' } }],
          requestBody: { required: true, content: json('VerdictBody') },
          responses: {
            '202': { description: 'The verdict taken.', content: { 'application/json': { schema: { type: 'object', properties: { unit: { type: 'string' }, component: { type: 'string' }, sampleId: { type: 'string' }, verdict: { type: 'string' }, by: { type: 'string' } }, required: ['unit', 'component', 'sampleId', 'verdict', 'by'] } } } },
            '400': error('A field is missing or invalid (invalid-request, naming it), or the body is not JSON (bad-request).'),
            ...AUTH_ERRORS,
            '404': error('The component holds no such sample.'),
            '409': error('The sample is not in doubt: no sampling finding questioned it, so it takes no verdict (not-in-doubt); or, for usual-rate, no change detector signals a rise at it (no-rise).'),
            ...BODY_ERRORS,
            ...PATH_ERRORS,
            ...STORE_UNAVAILABLE,
          },
        },
      },
      '/v1/units/{unit}/components/{component}/chart.svg': {
        get: {
          operationId: 'getChartSvg',
          summary: 'Trend chart of one measurand as SVG.',
          tags: ['components'],
          security: [{ bearer: ['viewer'] }, { bearer: ['responder'] }],
          parameters: [...component, { name: 'measurand', in: 'query', required: true, schema: { type: 'string' } }, { name: 'width', in: 'query', required: false, schema: { type: 'integer' } }, chartTitle],
          responses: {
            '200': { description: 'The chart.', content: { 'image/svg+xml': { schema: { type: 'string' } } } },
            '400': error('Missing or unknown measurand, or a width that is not a whole number from 320 to 2000 (invalid-request; issues name query.measurand, query.width).'),
            ...AUTH_ERRORS,
            '404': error('No readings.'),
            ...PATH_ERRORS,
            '503': unavailable(CHART_UNAVAILABLE),
          },
        },
      },
      '/v1/units/{unit}/components/{component}/chart.png': {
        get: {
          operationId: 'getChartPng',
          summary: 'Trend chart of one measurand as PNG.',
          tags: ['components'],
          security: [{ bearer: ['viewer'] }, { bearer: ['responder'] }],
          parameters: [...component, { name: 'measurand', in: 'query', required: true, schema: { type: 'string' } }, { name: 'width', in: 'query', required: false, schema: { type: 'integer' } }, chartTitle],
          responses: {
            '200': { description: 'The chart.', content: { 'image/png': { schema: { type: 'string', contentEncoding: 'binary' } } } },
            '400': error('Missing or unknown measurand, or a width that is not a whole number from 320 to 2000 (invalid-request; issues name query.measurand, query.width).'),
            ...AUTH_ERRORS,
            '404': error('No readings.'),
            ...PATH_ERRORS,
            '503': unavailable(CHART_UNAVAILABLE),
          },
        },
      },
      '/v1/events': {
        get: {
          operationId: 'streamEvents',
          summary: 'Server-sent events: incident changes and new results (the board\u2019s live feed); a history import\u2019s results once per component and job, its latest.',
          tags: ['incidents'],
          security: [{ bearer: ['viewer'] }, { bearer: ['responder'] }],
          responses: {
            '200': { description: 'An event stream; each data line is a JSON live event.', content: { 'text/event-stream': { schema: { type: 'string' } } } },
            ...AUTH_ERRORS,
            '429': {
              description: 'The token already holds as many live-event streams as one token may (8 by default), or the address as many as one address may (16 by default), or too many unknown tokens came from the address (too-many-requests); try again after Retry-After.',
              headers: { 'Retry-After': { $ref: '#/components/headers/RetryAfter' } },
              content: json('Error'),
            },
            '503': unavailable('As many live-event streams are open as the process serves (500 by default); try again after Retry-After.'),
          },
        },
      },
      '/v1/session': {
        get: {
          operationId: 'getSession',
          summary: 'What a token may do: its roles, and the time zone times are shown in (the board signs in with it).',
          tags: ['operations'],
          security: [{ bearer: ['viewer'] }, { bearer: ['responder'] }, { bearer: ['ingest'] }],
          responses: { '200': { description: 'The roles of the token.', content: json('Session') }, '401': error('No or unknown bearer token.'), ...GUESSING },
        },
      },
      '/healthz': { get: { operationId: 'healthz', summary: 'The process is alive.', tags: ['operations'], security: [], responses: { '200': { description: 'Alive.', content: json('Health') } } } },
      '/readyz': {
        get: {
          operationId: 'readyz',
          summary: 'Redis answers.',
          tags: ['operations'],
          security: [],
          responses: { '200': { description: 'Ready.', content: json('Health') }, '503': { description: 'Redis does not answer.', headers: { 'Retry-After': { $ref: '#/components/headers/RetryAfter' } }, content: json('Health') } },
        },
      },
      '/metrics': {
        get: { operationId: 'metrics', summary: 'Prometheus text exposition (without a token when WEARSHIFT_METRICS_PUBLIC=1).', tags: ['operations'], security: [{ bearer: ['viewer'] }, { bearer: ['responder'] }], responses: { '200': { description: 'Metrics.', content: { 'text/plain': { schema: { type: 'string' } } } }, ...AUTH_ERRORS } },
      },
      '/openapi.json': { get: { operationId: 'openapi', summary: 'This document.', tags: ['operations'], security: [], responses: { '200': { description: 'The OpenAPI document.', content: { 'application/json': { schema: { type: 'object' } } } } } } },
    },
    components: {
      headers: { RetryAfter: { description: 'Seconds to wait before trying again.', schema: { type: 'integer', minimum: 1 } } },
      securitySchemes: { bearer: { type: 'http', scheme: 'bearer', description: 'Tokens from WEARSHIFT_TOKEN_INGEST, WEARSHIFT_TOKEN_RESPONDER, WEARSHIFT_TOKEN_VIEWER.' } },
      schemas: {
        ResultEvent: schemaOf(ResultEventSchema, 'input'),
        ResultOutcomes: schemaOf(ResultOutcomesSchema, 'output'),
        IncidentList: schemaOf(IncidentListSchema, 'output'),
        IncidentEnvelope: schemaOf(IncidentEnvelopeSchema, 'output'),
        Series: schemaOf(SeriesSchema, 'output'),
        Health: schemaOf(HealthSchema, 'output'),
        Session: schemaOf(SessionSchema, 'output'),
        Error: schemaOf(ErrorBodySchema, 'output'),
        VerdictBody: schemaOf(VerdictBodySchema, 'input'),
        ...Object.fromEntries(Object.entries(INCIDENT_ACTION_BODIES).map(([verb, s]) => [`${verb[0]!.toUpperCase()}${verb.slice(1)}Body`, schemaOf(s, 'input')])),
      },
    },
  };
}
