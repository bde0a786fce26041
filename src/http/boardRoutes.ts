/**
 * The control-room board (fastify 5 plugin): the page at `/` (open incidents), the incident page at
 * `/incidents/<percent-encoded id>` (one incident with its evidence, charts and timeline: where e-mail links lead),
 * the component page at `/units/:unit/components/:component` (all its trends and its incident history), their
 * static assets under `/board/` (the entry script board.js, the ES modules it imports, style sheet and icon: every
 * .js, .css and .svg file of src/board), and `GET /v1/session`, which tells the page which roles its token holds
 * and the zone it shows times in.
 *
 * The pages themselves carry no data and need no token: the script asks for one, keeps it in the tab's
 * sessionStorage and sends it as a bearer token to the API (incidents, series, charts) and as a cookie to the
 * event stream (see eventRoutes.ts). A strict content security policy allows only the page's own script and style.
 */
import { readdirSync, readFileSync } from 'node:fs';
import type { FastifyPluginAsync, FastifyReply } from 'fastify';
import { ROLES, type AccessTokens } from './auth.ts';

export interface BoardRoutesOptions {
  /** The API's bearer tokens, for `GET /v1/session`. */
  readonly tokens: AccessTokens;
  /** The site zone the pages show times in (`display.timeZone`). Default UTC. */
  timeZone?: string;
}

type View = 'board' | 'incident' | 'component';

const BOARD_FOLDER = new URL('../board/', import.meta.url);
const asset = (name: string) => readFileSync(new URL(name, BOARD_FOLDER), 'utf8');

const PAGE_HEADERS = {
  'content-type': 'text/html; charset=utf-8',
  'cache-control': 'no-cache',
  'x-content-type-options': 'nosniff',
  'referrer-policy': 'no-referrer',
  'content-security-policy':
    "default-src 'none'; script-src 'self'; style-src 'self'; img-src 'self'; connect-src 'self'; base-uri 'none'; form-action 'self'; frame-ancestors 'none'",
};

/** Content types by file extension; a file of the board folder is served only when its name matches ASSET_NAME. */
const ASSET_TYPES: Record<string, string> = {
  js: 'text/javascript; charset=utf-8',
  css: 'text/css; charset=utf-8',
  svg: 'image/svg+xml',
};

/** A plain file name in the board folder: no path, no leading dot, one of the extensions above. */
const ASSET_NAME = /^[a-z][a-zA-Z0-9-]*\.(js|css|svg)$/;

/**
 * The board's assets (the entry script board.js and the ES modules it imports, the style sheet, the icon), read once
 * from src/board when the plugin starts: a module added to the folder is served without a route change, and a request
 * is answered from this map only, never from the file system.
 */
function readAssets(): Map<string, { body: string; type: string }> {
  const assets = new Map<string, { body: string; type: string }>();
  for (const entry of readdirSync(BOARD_FOLDER, { withFileTypes: true })) {
    const match = ASSET_NAME.exec(entry.name);
    if (match === null || !entry.isFile()) continue;
    assets.set(entry.name, { body: asset(entry.name), type: ASSET_TYPES[match[1]!]! });
  }
  return assets;
}

export const boardRoutes: FastifyPluginAsync<BoardRoutesOptions> = async (app, options) => {
  const shell = asset('board.html');
  const assets = readAssets();
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
    const found = assets.get(request.params.name);
    if (found === undefined) return reply.code(404).send({ error: 'not-found', message: `no board asset "${request.params.name}"` });
    return reply.headers({ 'content-type': found.type, 'cache-control': 'no-cache', 'x-content-type-options': 'nosniff' }).send(found.body);
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
