/**
 * The control-room board (fastify 5 plugin): the page at `/` (open incidents), the incident page at
 * `/incidents/<percent-encoded id>` (one incident with its evidence, charts and timeline: where e-mail links lead),
 * the component page at `/units/:unit/components/:component` (all its trends and its incident history), their
 * static assets under `/board/`, and `GET /v1/session`, which tells the page which roles its token holds and the
 * zone it shows times in.
 *
 * The pages themselves carry no data and need no token: the script asks for one, keeps it in the tab's
 * sessionStorage and sends it as a bearer token to the API (incidents, series, charts) and as a cookie to the
 * event stream (see eventRoutes.ts). A strict content security policy allows only the page's own script and style.
 */
import { readFileSync } from 'node:fs';
import type { FastifyPluginAsync, FastifyReply } from 'fastify';
import { ROLES, type AccessTokens } from './auth.ts';

export interface BoardRoutesOptions {
  /** The API's bearer tokens, for `GET /v1/session`. */
  readonly tokens: AccessTokens;
  /** The site zone the pages show times in (`display.timeZone`). Default UTC. */
  timeZone?: string;
}

type View = 'board' | 'incident' | 'component';

const asset = (name: string) => readFileSync(new URL(`../board/${name}`, import.meta.url), 'utf8');

const PAGE_HEADERS = {
  'content-type': 'text/html; charset=utf-8',
  'cache-control': 'no-cache',
  'x-content-type-options': 'nosniff',
  'referrer-policy': 'no-referrer',
  'content-security-policy':
    "default-src 'none'; script-src 'self'; style-src 'self'; img-src 'self'; connect-src 'self'; base-uri 'none'; form-action 'self'; frame-ancestors 'none'",
};

const ASSET_TYPES: Record<string, string> = {
  'board.js': 'text/javascript; charset=utf-8',
  'board.css': 'text/css; charset=utf-8',
  'icon.svg': 'image/svg+xml',
};

export const boardRoutes: FastifyPluginAsync<BoardRoutesOptions> = async (app, options) => {
  const shell = asset('board.html');
  const assets = new Map(Object.keys(ASSET_TYPES).map((name) => [name, asset(name)]));
  const tokens = options.tokens;
  const timeZone = options.timeZone ?? 'UTC';
  const page = (view: View) => shell.replace('{{view}}', view);
  const sendPage = (reply: FastifyReply, view: View) => reply.headers(PAGE_HEADERS).send(page(view));

  app.get('/', async (_request, reply) => sendPage(reply, 'board'));
  // A wildcard: incident ids hold '/', which a link may carry encoded (%2F) or not. The page itself holds no data;
  // its script asks for the token and loads the incident from the API, exactly as the board does.
  app.get('/incidents/*', async (_request, reply) => sendPage(reply, 'incident'));
  app.get('/units/:unit/components/:component', async (_request, reply) => sendPage(reply, 'component'));

  app.get<{ Params: { name: string } }>('/board/:name', async (request, reply) => {
    const body = assets.get(request.params.name);
    if (body === undefined) return reply.code(404).send({ error: 'not-found', message: `no board asset "${request.params.name}"` });
    return reply.headers({ 'content-type': ASSET_TYPES[request.params.name]!, 'cache-control': 'no-cache', 'x-content-type-options': 'nosniff' }).send(body);
  });

  app.get('/v1/session', async (request, reply) => {
    const match = /^Bearer\s+(\S+)\s*$/i.exec(request.headers.authorization ?? '');
    const roles = match === null ? new Set() : tokens.rolesOf(match[1]!);
    if (roles.size === 0) {
      return reply
        .code(401)
        .header('www-authenticate', 'Bearer realm="wearshift"')
        .header('cache-control', 'no-store')
        .send({ error: 'unauthorized', message: match === null ? 'an Authorization: Bearer <token> header is required' : 'unknown token' });
    }
    return reply.header('cache-control', 'no-store').send({ roles: ROLES.filter((r) => roles.has(r)), timeZone });
  });
};
