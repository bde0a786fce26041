/**
 * Bearer-token roles for the HTTP API. The tokens are handed to the server (`AccessTokens`); the process wiring
 * reads them from WEARSHIFT_TOKEN_INGEST, WEARSHIFT_TOKEN_RESPONDER and WEARSHIFT_TOKEN_VIEWER, each a
 * comma-separated list (several tokens allow rotation), in src/runtime/accessTokensFromEnv.ts. A token may hold
 * several roles. Comparison runs over digests in constant time and always against every token, so timing
 * says nothing about how close a guess came.
 */
import { createHash, timingSafeEqual } from 'node:crypto';
import type { FastifyReply, FastifyRequest } from 'fastify';

export const ROLES = ['ingest', 'responder', 'viewer'] as const;
export type Role = (typeof ROLES)[number];

const digest = (token: string) => createHash('sha256').update(token).digest();

/** The API's bearer tokens by role, kept as digests only. */
export class AccessTokens {
  private readonly entries: readonly { readonly digest: Buffer; readonly role: Role }[];

  /** @param byRole the tokens each role accepts (several during a rotation); empty strings are ignored */
  constructor(byRole: Readonly<Partial<Record<Role, readonly string[]>>>) {
    this.entries = ROLES.flatMap((role) => (byRole[role] ?? []).map((t) => t.trim()).filter((t) => t !== '').map((t) => ({ digest: digest(t), role })));
  }

  /** The roles a presented token holds; empty for an unknown token. Compares against every token in constant time. */
  rolesOf(token: string): Set<Role> {
    const d = digest(token);
    const roles = new Set<Role>();
    for (const entry of this.entries) if (timingSafeEqual(d, entry.digest)) roles.add(entry.role);
    return roles;
  }
}

/** The credential each authorised request presented, as the incident history records it. */
const credentials = new WeakMap<FastifyRequest, string>();

/** "responder token 3f2a9c1e": the role the request was let through for and the first digest bytes of its token. */
export function credentialOf(request: FastifyRequest): string | undefined {
  return credentials.get(request);
}

/**
 * A fastify hook that lets a request through when its bearer token holds one of `roles`:
 * 401 (with `WWW-Authenticate: Bearer`) without a known token, 403 when the token's roles do not permit it.
 * Routes register it as `onRequest`, so that a refused request is answered before its body is read: no parsing, no
 * 413 or 400 that would tell an unauthenticated client anything, and no slow body holding the socket.
 */
export function requireRole(tokens: AccessTokens, ...roles: Role[]) {
  return async (request: FastifyRequest, reply: FastifyReply): Promise<void> => {
    const header = request.headers.authorization;
    const match = header === undefined ? null : /^Bearer\s+(\S+)\s*$/i.exec(header);
    const held = match === null ? new Set<Role>() : tokens.rolesOf(match[1]!);
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
