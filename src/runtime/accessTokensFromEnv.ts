/** The API's bearer tokens from the environment: WEARSHIFT_TOKEN_INGEST, _RESPONDER and _VIEWER, comma-separated. */
import { AccessTokens, ROLES, type Role } from '../http/auth.ts';

export const TOKEN_VARIABLES: Readonly<Record<Role, string>> = {
  ingest: 'WEARSHIFT_TOKEN_INGEST',
  responder: 'WEARSHIFT_TOKEN_RESPONDER',
  viewer: 'WEARSHIFT_TOKEN_VIEWER',
};

export function accessTokensFromEnv(env: NodeJS.ProcessEnv): AccessTokens {
  return new AccessTokens(Object.fromEntries(ROLES.map((role) => [role, (env[TOKEN_VARIABLES[role]] ?? '').split(',')])), TOKEN_VARIABLES);
}
