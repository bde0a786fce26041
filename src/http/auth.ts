/**
 * Bearer-token roles for the HTTP API. Tokens come from WEARSHIFT_TOKEN_INGEST, WEARSHIFT_TOKEN_RESPONDER and
 * WEARSHIFT_TOKEN_VIEWER, each a comma-separated list (several tokens allow rotation). A token may hold
 * several roles. Comparison runs over digests in constant time and always against every token, so timing
 * says nothing about how close a guess came.
 */
import { createHash, timingSafeEqual } from 'node:crypto';
import type { FastifyReply, FastifyRequest } from 'fastify';

export const ROLES = ['ingest', 'responder', 'viewer'] as const;
export type Role = (typeof ROLES)[number];

const ENV_OF: Record<Role, string> = {
  ingest: 'WEARSHIFT_TOKEN_INGEST',
  responder: 'WEARSHIFT_TOKEN_RESPONDER',
  viewer: 'WEARSHIFT_TOKEN_VIEWER',
};

interface TokenEntry {
  readonly digest: Buffer;
  readonly role: Role;
}

const digest = (token: string) => createHash('sha256').update(token).digest();

export function tokensFromEnv(env: NodeJS.ProcessEnv = process.env): TokenEntry[] {
  return ROLES.flatMap((role) =>
    (env[ENV_OF[role]] ?? '')
      .split(',')
      .map((t) => t.trim())
      .filter((t) => t !== '')
      .map((t) => ({ digest: digest(t), role })),
  );
}

/** The roles a presented token holds; empty for an unknown token. */
export function rolesOf(token: string, tokens: readonly TokenEntry[]): Set<Role> {
  const d = digest(token);
  const roles = new Set<Role>();
  for (const entry of tokens) if (timingSafeEqual(d, entry.digest)) roles.add(entry.role);
  return roles;
}

/** The credential each authorised request presented, as the incident history records it. */
const credentials = new WeakMap<FastifyRequest, string>();

/** "responder token 3f2a9c1e": the role the request was let through for and the first digest bytes of its token. */
export function credentialOf(request: FastifyRequest): string | undefined {
  return credentials.get(request);
}

/**
 * A fastify preHandler that lets a request through when its bearer token holds one of `roles`:
 * 401 (with `WWW-Authenticate: Bearer`) without a known token, 403 when the token's roles do not permit it.
 * The tokens are read from the environment when the handler is made.
 */
export function requireRole(...roles: Role[]) {
  const tokens = tokensFromEnv();
  return async (request: FastifyRequest, reply: FastifyReply): Promise<void> => {
    const header = request.headers.authorization;
    const match = header === undefined ? null : /^Bearer\s+(\S+)\s*$/i.exec(header);
    const held = match === null ? new Set<Role>() : rolesOf(match[1]!, tokens);
    if (held.size === 0) {
      await reply
        .code(401)
        .header('www-authenticate', match === null ? 'Bearer realm="wearshift"' : 'Bearer realm="wearshift", error="invalid_token"')
        .send({ error: 'unauthorized', message: match === null ? 'an Authorization: Bearer <token> header is required' : 'unknown token' });
      return;
    }
    const role = roles.find((r) => held.has(r));
    if (role === undefined) {
      await reply.code(403).send({ error: 'forbidden', message: `this needs the role ${roles.join(' or ')}; the token holds ${[...held].join(', ')}` });
      return;
    }
    // Eight hex digits of the token's SHA-256: tells tokens apart in the history without being usable as one.
    credentials.set(request, `${role} token ${digest(match![1]!).subarray(0, 4).toString('hex')}`);
  };
}
