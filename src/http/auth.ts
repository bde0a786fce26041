/**
 * Bearer-token roles for the HTTP API. The tokens are handed to the server (`AccessTokens`); the process wiring
 * reads them from WEARSHIFT_TOKEN_INGEST, WEARSHIFT_TOKEN_RESPONDER and WEARSHIFT_TOKEN_VIEWER, each a
 * comma-separated list (several tokens allow rotation), in src/runtime/accessTokensFromEnv.ts. A token may hold
 * several roles. Comparison runs over digests in constant time and always against every token, so timing
 * says nothing about how close a guess came.
 */
import { createHash, timingSafeEqual } from 'node:crypto';
import type { FastifyReply, FastifyRequest } from 'fastify';
import { InputError } from '../domain/errors.ts';

export const ROLES = ['ingest', 'responder', 'viewer'] as const;
export type Role = (typeof ROLES)[number];

const digest = (token: string) => createHash('sha256').update(token).digest();

/** The shortest token accepted: a shorter one could be guessed, however slowly guesses are answered. */
export const MIN_TOKEN_LENGTH = 16;

const ordinal = (n: number) => `${n}${n % 10 === 1 && n % 100 !== 11 ? 'st' : n % 10 === 2 && n % 100 !== 12 ? 'nd' : n % 10 === 3 && n % 100 !== 13 ? 'rd' : 'th'}`;

/** The API's bearer tokens by role, kept as digests only. */
export class AccessTokens {
  private readonly entries: readonly { readonly digest: Buffer; readonly role: Role }[];

  /**
   * @param byRole the tokens each role accepts (several during a rotation); empty strings are ignored
   * @param sources where each role's tokens are configured (an environment variable), named when one is refused
   * @throws InputError for a token shorter than MIN_TOKEN_LENGTH, naming its place (never the token)
   */
  constructor(byRole: Readonly<Partial<Record<Role, readonly string[]>>>, sources: Readonly<Partial<Record<Role, string>>> = {}) {
    this.entries = ROLES.flatMap((role) => {
      const given = (byRole[role] ?? []).map((t) => t.trim()).filter((t) => t !== '');
      given.forEach((t, i) => {
        if (t.length < MIN_TOKEN_LENGTH) {
          const where = sources[role] ?? `the ${role} tokens`;
          throw new InputError(
            `${where}: the ${ordinal(i + 1)} token is ${t.length} characters long; a token needs at least ${MIN_TOKEN_LENGTH} (for instance the output of \`openssl rand -base64 24\`)`,
          );
        }
      });
      return given.map((t) => ({ digest: digest(t), role }));
    });
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

/** The SHA-256 of the token each authorised request presented (hex), to count what one token holds open. */
const tokenDigests = new WeakMap<FastifyRequest, string>();

/** The hex SHA-256 of the token the request was let through with; undefined before or without `requireRole`. */
export function tokenDigestOf(request: FastifyRequest): string | undefined {
  return tokenDigests.get(request);
}

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
    const presented = digest(match![1]!);
    tokenDigests.set(request, presented.toString('hex'));
    // Eight hex digits of the token's SHA-256: tells tokens apart in the history without being usable as one.
    credentials.set(request, `${role} token ${presented.subarray(0, 4).toString('hex')}`);
  };
}
