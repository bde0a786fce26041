/**
 * The incident API (fastify 5 plugin): list (a page at a time, continued by an opaque cursor) and show for viewers
 * and responders; acknowledge, shelve, unshelve, resolve and note for responders. Incident ids hold '/' and must be
 * percent-encoded in the path.
 * Every answer that carries incidents carries the caution beside them (`advisory`), as webhooks and the CLI do.
 */
import type { FastifyPluginAsync, FastifyReply } from 'fastify';
import { z } from 'zod';
import { ADVISORY_CAUTION } from '../domain/caution.ts';
import { InputError } from '../domain/errors.ts';
import { ActorNameSchema } from '../domain/actorName.ts';
import type { IncidentAction } from '../incidents/applyAction.ts';
import { IncidentConflictError, IncidentNotFoundError } from '../incidents/errors.ts';
import type { IncidentFilter } from '../incidents/listFilter.ts';
import { decodeCursor, encodeCursor, IncidentListQuerySchema, type IncidentPage, type ListPosition } from '../incidents/listPage.ts';
import type { Incident, IncidentSummary } from '../incidents/model.ts';
import { credentialOf, requireRole, type AccessTokens } from './auth.ts';
import { DEFAULT_HTTP_LIMITS } from './limits.ts';

/** What the routes need of the incident store (the Redis store provides it). */
export interface IncidentRoutesStore {
  get(incidentId: string): Promise<Incident | undefined>;
  list(filter: IncidentFilter): Promise<IncidentSummary[]>;
  /**
   * One page of the list, strictly after `after` when given, reading at most `examineAtMost` records when given (a
   * page cut short by it continues with `next`; see RedisIncidents.page).
   */
  page(filter: IncidentFilter, after?: ListPosition, options?: { readonly examineAtMost?: number }): Promise<IncidentPage>;
  applyAction(action: IncidentAction): Promise<{ incident: Incident }>;
}

export interface IncidentRoutesOptions {
  /** The API's bearer tokens. */
  readonly tokens: AccessTokens;
  readonly store: IncidentRoutesStore;
  /** Default: the system clock. */
  readonly now?: () => Date;
  /** Most incident records one list request reads looking for matches; the page then ends early with `next`. Default 2 000. */
  readonly scanRecords?: number;
  /**
   * Lists with a filter that reads records (unit, group, severity, or a state within the open ones) answered at once;
   * a further one gets 503 with Retry-After. Default 4.
   */
  readonly scanConcurrency?: number;
}

/** Whether a list needs incident records read (more than the indexes' order) to find its matches. */
function readsRecords(filter: IncidentFilter): boolean {
  return filter.severity !== undefined || filter.unit !== undefined || filter.group !== undefined || !['open', 'closed', 'all'].includes(filter.state);
}

/** Seconds a list refused for want of a scan slot is asked to wait. */
const SCAN_RETRY_AFTER_S = 1;

// Control characters (ESC, CR, C1) and bidirectional overrides would act on a terminal that prints the history, or
// make a line read differently from what it holds: refused, naming the field. Notes may hold line breaks and tabs.
// eslint-disable-next-line no-control-regex
const CONTROLS_IN_TEXT = /[\u0000-\u0008\u000b-\u001f\u007f-\u009f\u2028\u2029\u202a-\u202e\u2066-\u2069]/;
const by = ActorNameSchema;
const text = (max: number) =>
  z
    .string()
    .trim()
    .min(1, 'required')
    .max(max, `at most ${max} characters`)
    .refine((s) => !CONTROLS_IN_TEXT.test(s), 'must not hold control characters other than line breaks and tabs');
const instant = z.iso.datetime({ offset: true, message: 'expected an ISO 8601 date-time with a time zone, such as 2026-03-01T18:00:00Z' });

export const INCIDENT_ACTION_BODIES = {
  ack: z.object({ by, note: text(2000).optional() }).strict(),
  shelve: z.object({ by, until: instant, reason: text(500) }).strict(),
  unshelve: z.object({ by }).strict(),
  resolve: z.object({ by, note: text(2000) }).strict(),
  note: z.object({ by, note: text(2000) }).strict(),
} as const;
type Verb = keyof typeof INCIDENT_ACTION_BODIES;

function toAction(verb: Verb, incidentId: string, body: unknown, now: Date): IncidentAction | z.ZodError {
  const base = { incidentId, now };
  switch (verb) {
    case 'ack': {
      const b = INCIDENT_ACTION_BODIES.ack.safeParse(body);
      return b.success ? { kind: 'acknowledge', ...base, by: b.data.by, ...(b.data.note !== undefined && { note: b.data.note }) } : b.error;
    }
    case 'shelve': {
      const b = INCIDENT_ACTION_BODIES.shelve.safeParse(body);
      return b.success ? { kind: 'shelve', ...base, by: b.data.by, until: new Date(b.data.until), reason: b.data.reason } : b.error;
    }
    case 'unshelve': {
      const b = INCIDENT_ACTION_BODIES.unshelve.safeParse(body);
      return b.success ? { kind: 'unshelve', ...base, by: b.data.by } : b.error;
    }
    case 'resolve':
    case 'note': {
      const b = INCIDENT_ACTION_BODIES[verb].safeParse(body);
      return b.success ? { kind: verb, ...base, by: b.data.by, note: b.data.note } : b.error;
    }
  }
}

function invalid(reply: FastifyReply, where: 'body' | 'query', error: z.ZodError | { issues: readonly { path: readonly PropertyKey[]; message: string }[] }) {
  const issues = error.issues.map((i) => ({ field: [where, ...i.path.map(String)].join('.'), message: i.message }));
  return reply.code(400).send({ error: 'invalid-request', message: issues.map((i) => `${i.field}: ${i.message}`).join('; '), issues });
}

/** Query parameters that take a list: repeated (severity=alarm&severity=watch), they mean the comma-separated list. */
const LIST_PARAMETERS = new Set(['severity']);

/**
 * The query as the filter reads it: a repeated list parameter joined, any other parameter given more than once
 * refused naming it (which of its values was meant cannot be told).
 */
function singleValues(query: Record<string, unknown>): { ok: true; query: Record<string, unknown> } | { ok: false; issues: { path: string[]; message: string }[] } {
  const issues: { path: string[]; message: string }[] = [];
  const out: Record<string, unknown> = {};
  for (const [name, value] of Object.entries(query)) {
    if (!Array.isArray(value)) out[name] = value;
    else if (LIST_PARAMETERS.has(name)) out[name] = value.join(',');
    else issues.push({ path: [name], message: `given ${value.length} times; it takes one value` });
  }
  return issues.length > 0 ? { ok: false, issues } : { ok: true, query: out };
}

function failed(reply: FastifyReply, verb: Verb, e: unknown) {
  if (e instanceof IncidentNotFoundError) return reply.code(404).send({ error: 'not-found', message: e.message });
  if (e instanceof IncidentConflictError) {
    if (e.retryAfterSeconds !== undefined) void reply.header('Retry-After', String(e.retryAfterSeconds));
    return reply.code(409).send({ error: 'conflict', message: e.message });
  }
  if (e instanceof InputError) {
    // The incident rules name the action's field first ("until: shelving is limited to …"): a field of the body is
    // named as the body's schema problems are, in issues; anything else is the action's, told in the message alone.
    const named = /^(\w+): ([\s\S]+)$/.exec(e.message);
    if (named !== null && Object.hasOwn(INCIDENT_ACTION_BODIES[verb].shape, named[1]!)) return invalid(reply, 'body', { issues: [{ path: [named[1]!], message: named[2]! }] });
    return reply.code(400).send({ error: 'invalid-request', message: e.message });
  }
  throw e;
}

export const incidentRoutes: FastifyPluginAsync<IncidentRoutesOptions> = async (app, options) => {
  const now = options.now ?? (() => new Date());
  const scanRecords = options.scanRecords ?? DEFAULT_HTTP_LIMITS.incidentScanRecords;
  const scanConcurrency = options.scanConcurrency ?? DEFAULT_HTTP_LIMITS.incidentScanConcurrency;
  let scanning = 0;
  // On request, before the body is read: a refused request costs no parsing and cannot hold the socket with a slow body.
  const read = { onRequest: requireRole(options.tokens, 'viewer', 'responder') };
  const act = { onRequest: requireRole(options.tokens, 'responder') };

  app.get('/v1/incidents', read, async (request, reply) => {
    const given = singleValues((request.query ?? {}) as Record<string, unknown>);
    if (!given.ok) return invalid(reply, 'query', given);
    const query = IncidentListQuerySchema.safeParse(given.query);
    if (!query.success) return invalid(reply, 'query', query.error);
    const { cursor, ...filter } = query.data;
    const after = cursor === undefined ? undefined : decodeCursor(filter, cursor);
    if (after !== undefined && !after.ok) return invalid(reply, 'query', { issues: [{ path: ['cursor'], message: after.reason }] });
    const scans = readsRecords(filter);
    if (scans && scanning >= scanConcurrency) {
      return reply
        .code(503)
        .header('retry-after', String(SCAN_RETRY_AFTER_S))
        .send({ error: 'unavailable', message: `${scanning} filtered incident lists are being read, the most this process reads at once; try again in ${SCAN_RETRY_AFTER_S} s` });
    }
    if (scans) scanning += 1;
    let page: IncidentPage;
    try {
      // A list by state alone shows every record it reads (up to limit + 1); only a filter reads records it does not show.
      page = await options.store.page(filter, after?.position, scans ? { examineAtMost: scanRecords } : {});
    } finally {
      if (scans) scanning -= 1;
    }
    return { incidents: page.incidents, next: page.next === null ? null : encodeCursor(filter, page.next), total: page.total, advisory: ADVISORY_CAUTION };
  });

  app.get<{ Params: { id: string } }>('/v1/incidents/:id', read, async (request, reply) => {
    const incident = await options.store.get(request.params.id);
    if (incident === undefined) return reply.code(404).send({ error: 'not-found', message: `no incident "${request.params.id}"` });
    return { incident, advisory: ADVISORY_CAUTION };
  });

  for (const verb of Object.keys(INCIDENT_ACTION_BODIES) as Verb[]) {
    app.post<{ Params: { id: string } }>(`/v1/incidents/:id/${verb}`, act, async (request, reply) => {
      const parsed = toAction(verb, request.params.id, request.body, now());
      if (parsed instanceof z.ZodError) return invalid(reply, 'body', parsed);
      const credential = credentialOf(request);
      // Who acknowledged is recorded by the token presented, not only by the name typed.
      const action: IncidentAction = parsed.kind === 'acknowledge' && credential !== undefined ? { ...parsed, credential } : parsed;
      try {
        const { incident } = await options.store.applyAction(action);
        return { incident, advisory: ADVISORY_CAUTION };
      } catch (e) {
        return failed(reply, verb, e);
      }
    });
  }
};
