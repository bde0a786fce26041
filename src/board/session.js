/*
 * The tab's session and the API: the token (kept in the tab's sessionStorage), the roles the server says it holds,
 * the site zone times are shown in, and the one fetch helper every call to the API goes through (the token as a
 * bearer token; the event stream gets it as a cookie, set on sign-in).
 */
/* global document, sessionStorage, fetch, location */

const TOKEN_KEY = 'wearshift.token';
const NAME_KEY = 'wearshift.name';
const EVENT_COOKIE = 'wearshift_token';

export const session = {
  token: sessionStorage.getItem(TOKEN_KEY),
  name: sessionStorage.getItem(NAME_KEY) ?? '',
  roles: [],
  /** The site zone times are shown in; the server says which (display.timeZone). */
  timeZone: 'UTC',
};

export async function api(path, options = {}) {
  const headers = { accept: 'application/json', authorization: `Bearer ${session.token}` };
  if (options.body !== undefined) headers['content-type'] = 'application/json';
  let response;
  try {
    response = await fetch(path, { method: options.method ?? 'GET', headers, body: options.body === undefined ? undefined : JSON.stringify(options.body) });
  } catch {
    return { ok: false, status: 0, body: { message: 'the server cannot be reached' } };
  }
  const type = response.headers.get('content-type') ?? '';
  const body = type.includes('json') ? await response.json().catch(() => ({})) : await response.text();
  return { ok: response.ok, status: response.status, body };
}

export function problemText(result) {
  const message = typeof result.body === 'object' && result.body !== null && typeof result.body.message === 'string' ? result.body.message : '';
  const reason =
    result.status === 403
      ? 'Refused (403 forbidden)'
      : result.status === 401
        ? 'Refused (401: token not accepted)'
        : result.status === 0
          ? 'Not sent'
          : `Failed (${result.status})`;
  return message === '' ? `${reason}.` : `${reason}: ${message}.`;
}

/** Checks the token with the server; the problem in words when it is not accepted, else undefined. */
export async function signIn(token, name) {
  session.token = token;
  const result = await api('/v1/session');
  if (!result.ok) {
    session.token = null;
    return result.status === 401 ? 'That token is not accepted.' : problemText(result);
  }
  session.roles = result.body.roles;
  session.timeZone = typeof result.body.timeZone === 'string' ? result.body.timeZone : 'UTC';
  session.name = name;
  sessionStorage.setItem(TOKEN_KEY, token);
  sessionStorage.setItem(NAME_KEY, name);
  // EventSource cannot send headers: the token rides along in a cookie for the event stream's path only.
  const secure = location.protocol === 'https:' ? '; Secure' : '';
  document.cookie = `${EVENT_COOKIE}=${encodeURIComponent(token)}; Path=/v1/events; SameSite=Strict${secure}`;
  return undefined;
}

/** Forgets the token in this tab and in the event stream's cookie. */
export function forgetToken() {
  sessionStorage.removeItem(TOKEN_KEY);
  document.cookie = `${EVENT_COOKIE}=; Path=/v1/events; Max-Age=0; SameSite=Strict`;
}

export const canAct = () => session.roles.includes('responder');
