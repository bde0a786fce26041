/**
 * The pages behind e-mailed acknowledgement links (fastify 5 plugin).
 *
 * `GET /ack/<token>` only shows what the incident is and a confirmation form: mail scanners and link
 * previews follow links, so a GET must never acknowledge. `POST /ack/<token>` from that form acknowledges; its link is
 * checked before its body is read, so a link that was not signed here costs no more than its request head.
 */
import type { FastifyPluginAsync, FastifyReply, FastifyRequest } from 'fastify';
import { ACK_SECRET_MIN_LENGTH, verifyAckLink, type AckLinkClaims } from '../notify/ackLink.ts';
import { ACK_NAME_MAX, ACK_NOTE_MAX, renderAckPage, type AckIncidentSummary, type AckPageView } from '../notify/ackPage.ts';
import { oneLine } from '../domain/safeText.ts';

export interface AckLinkRoutesOptions {
  /** Accepted signing secrets, the current one first; older ones keep links already sent working. */
  secrets: string[];
  /** Records the acknowledgement; should be idempotent, since two clicks may race. */
  acknowledge(incidentId: string, by: string, note: string | undefined, context: { recipient: string }): Promise<void>;
  /** The incident as the page shows it; undefined when no such incident is known. */
  describe(incidentId: string): Promise<AckIncidentSummary | undefined>;
  /** The clock for link expiry. Default: the system clock. */
  now?: () => Date;
}

const FORM = 'application/x-www-form-urlencoded';
/** The largest acknowledgement form: a name and a note, percent-encoded. */
const ACK_FORM_MAX_BYTES = 8192;

const PAGE_HEADERS = {
  'content-type': 'text/html; charset=utf-8',
  // The token is a credential: keep it out of caches, out of Referer headers and out of search engines.
  'cache-control': 'no-store',
  'referrer-policy': 'no-referrer',
  'x-robots-tag': 'noindex',
  'x-content-type-options': 'nosniff',
  'content-security-policy': "default-src 'none'; style-src 'unsafe-inline'; form-action 'self'; frame-ancestors 'none'",
};

export const ackLinkRoutes: FastifyPluginAsync<AckLinkRoutesOptions> = async (app, options) => {
  if (options.secrets.length === 0) throw new TypeError('ackLinkRoutes: at least one secret is needed');
  // Refused when the server is built, not by every link followed: a secret the links cannot be checked with would
  // otherwise fail each request.
  if (options.secrets.some((s) => s.length < ACK_SECRET_MIN_LENGTH)) throw new TypeError(`ackLinkRoutes: every secret must be at least ${ACK_SECRET_MIN_LENGTH} characters long`);
  const now = options.now ?? (() => new Date());

  if (!app.hasContentTypeParser(FORM)) {
    app.addContentTypeParser(FORM, { parseAs: 'string', bodyLimit: ACK_FORM_MAX_BYTES }, (_req, body, done) => {
      done(null, Object.fromEntries(new URLSearchParams(String(body))));
    });
  }

  /** Verifies the link's signature and expiry (no I/O), or answers with the refusal page. */
  function verify(request: FastifyRequest, reply: FastifyReply): AckLinkClaims | undefined {
    // A wildcard rather than a :token parameter, because the router refuses parameters over 100 characters
    // by default and a token with a long recipient address is longer than that.
    const token = (request.params as Record<string, string | undefined>)['*'] ?? '';
    const verdict = token.includes('/') ? ({ ok: false, reason: 'malformed' } as const) : verifyAckLink(token, options.secrets, now());
    if (verdict.ok) return verdict.claims;
    // The socket is closed after the refusal: a form body the client may still be sending is not read.
    send(reply.header('connection', 'close'), verdict.reason === 'expired' ? 410 : 403, { kind: 'refused', reason: verdict.reason });
    return undefined;
  }

  /** Finds the incident of a verified link, or answers with the refusal page. */
  async function incidentOf(claims: AckLinkClaims, reply: FastifyReply): Promise<AckIncidentSummary | undefined> {
    const incident = await options.describe(claims.incidentId);
    if (incident === undefined) send(reply, 404, { kind: 'refused', reason: 'unknown-incident' });
    return incident;
  }

  /** Claims of links checked before their request's body was read, for the handler. */
  const checked = new WeakMap<FastifyRequest, AckLinkClaims>();

  app.get('/ack/*', async (request, reply) => {
    const claims = verify(request, reply);
    if (claims === undefined) return reply;
    const incident = await incidentOf(claims, reply);
    if (incident === undefined) return reply;
    if (incident.closed) return send(reply, 200, { kind: 'closed', incident });
    if (incident.acknowledgedBy !== undefined) return send(reply, 200, { kind: 'already-acknowledged', incident });
    return send(reply, 200, { kind: 'confirm', incident, name: claims.recipient, expiresAt: claims.expiresAt });
  });

  // The form is a name and a note: the route takes no more than its parser does, whatever the content type.
  app.post('/ack/*', {
    bodyLimit: ACK_FORM_MAX_BYTES,
    // The link is checked before the body is read: a link we did not sign, or one that has expired, is refused
    // without taking a byte of its form. The incident is looked up after the body, so the page shows it as it is then.
    onRequest: async (request, reply) => {
      const claims = verify(request, reply);
      if (claims === undefined) return reply;
      checked.set(request, claims);
    },
    handler: async (request, reply) => {
      const claims = checked.get(request) ?? verify(request, reply);
      if (claims === undefined) return reply;
      const incident = await incidentOf(claims, reply);
      if (incident === undefined) return reply;
      if (incident.closed) return send(reply, 409, { kind: 'closed', incident });
      if (incident.acknowledgedBy !== undefined) return send(reply, 200, { kind: 'already-acknowledged', incident });

      const form = (typeof request.body === 'object' && request.body !== null ? request.body : {}) as Record<string, unknown>;
      const name = oneLine(field(form.name));
      const note = oneLine(field(form.note));
      const again = (problem: string) => send(reply, 400, { kind: 'confirm', incident, name, note, expiresAt: claims.expiresAt, problem });
      if (name === '') return again('Please give your name: the acknowledgement records who owns the incident.');
      if (name.length > ACK_NAME_MAX) return again(`The name may be at most ${ACK_NAME_MAX} characters long.`);
      if (note.length > ACK_NOTE_MAX) return again(`The note may be at most ${ACK_NOTE_MAX} characters long.`);

      try {
        await options.acknowledge(incident.id, name, note === '' ? undefined : note, { recipient: claims.recipient });
      } catch (e) {
        request.log.error({ err: e, incidentId: incident.id }, 'acknowledgement from an e-mail link failed');
        return send(reply, 500, { kind: 'failed' });
      }
      const after = await options.describe(incident.id).catch(() => undefined);
      return send(reply, 200, { kind: 'done', incident: after ?? incident, by: name });
    },
  });
};

function field(value: unknown): string {
  if (Array.isArray(value)) return field(value[0]);
  return typeof value === 'string' ? value : '';
}

function send(reply: FastifyReply, status: number, view: AckPageView): FastifyReply {
  return reply.code(status).headers(PAGE_HEADERS).send(renderAckPage(view));
}
