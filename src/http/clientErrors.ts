/**
 * The answers to requests the framework refuses before a route sees them — a body that is not JSON, empty or too
 * large, a content type no parser takes, a path parameter over the router's limit, a path that is not valid
 * percent-encoding, a path no route serves — in the API's documented Error shape (`{error, message, …}`,
 * src/contracts/responseSchemas.ts) rather than the framework's own. Messages never echo more than a short piece
 * of what was sent.
 */
import type { FastifyError, FastifyRequest } from 'fastify';
import { formatBytes } from './limits.ts';

export interface ErrorBody {
  readonly error: string;
  readonly message: string;
  /** With payload-too-large: the body limit of the route, in bytes. */
  readonly maxBytes?: number;
  /** With unsupported-media-type: the content types the route takes. */
  readonly accepted?: readonly string[];
}

export interface ClientError {
  readonly status: number;
  readonly body: ErrorBody;
}

/** Media types the API's routes may take; a route takes those it has a parser for. */
const MEDIA_TYPES = ['application/json', 'application/x-ndjson', 'application/x-www-form-urlencoded'] as const;

/** The longest piece of a path or a header an answer echoes. */
const ECHOED_CHARS = 120;

const WORDS: Record<number, string> = {
  400: 'bad-request',
  401: 'unauthorized',
  403: 'forbidden',
  404: 'not-found',
  405: 'method-not-allowed',
  408: 'timeout',
  409: 'conflict',
  411: 'length-required',
  413: 'payload-too-large',
  414: 'uri-too-long',
  415: 'unsupported-media-type',
  429: 'too-many-requests',
  431: 'headers-too-large',
};

/** `text` cut to `max` characters, with an ellipsis when something was left out. */
export function echoed(text: string, max = ECHOED_CHARS): string {
  return text.length > max ? `${text.slice(0, max)}…` : text;
}

/** The path of a request without its query string, as an answer may echo it. */
function pathOf(request: FastifyRequest): string {
  const url = request.raw.url ?? request.url;
  const q = url.indexOf('?');
  return echoed(q === -1 ? url : url.slice(0, q));
}

/** The content types the request's route takes (those of the API it has a parser for). */
export function acceptedTypes(request: FastifyRequest): string[] {
  return MEDIA_TYPES.filter((t) => request.server.hasContentTypeParser(t));
}

/**
 * The documented answer to a 4xx error the framework (or a parser) raised for `request`; undefined for an error that
 * is not a client error (the caller answers 500 or 503).
 */
export function clientError(error: FastifyError, request: FastifyRequest, options: { maxParamLength?: number } = {}): ClientError | undefined {
  const status = error.statusCode;
  if (status === undefined || status < 400 || status >= 500) return undefined;
  const contentType = echoed(String(request.headers['content-type'] ?? '').split(';')[0]!.trim(), 80);
  switch (error.code) {
    case 'FST_ERR_CTP_BODY_TOO_LARGE': {
      const maxBytes = request.routeOptions.bodyLimit;
      return { status: 413, body: { error: 'payload-too-large', message: `the request body exceeds the limit of ${formatBytes(maxBytes)}; nothing was taken, send less at once`, maxBytes } };
    }
    case 'FST_ERR_CTP_INVALID_MEDIA_TYPE': {
      const accepted = acceptedTypes(request);
      const given = contentType === '' ? 'no content type' : `the content type "${contentType}"`;
      return { status: 415, body: { error: 'unsupported-media-type', message: `${request.method} ${pathOf(request)} does not take ${given}; send ${accepted.join(' or ')}`, accepted } };
    }
    case 'FST_ERR_CTP_EMPTY_JSON_BODY':
      return { status: 400, body: { error: 'bad-request', message: 'the body is empty, but the content type says JSON: send a JSON object' } };
    case 'FST_ERR_CTP_INVALID_JSON_BODY':
      return { status: 400, body: { error: 'bad-request', message: 'the body is not valid JSON, but the content type says it is' } };
    case 'FST_ERR_CTP_INVALID_CONTENT_LENGTH':
      return { status: 400, body: { error: 'bad-request', message: 'the body is not as long as its Content-Length header says' } };
    case 'FST_ERR_MAX_PARAM_LENGTH': {
      const limit = options.maxParamLength === undefined ? '' : ` of ${options.maxParamLength} characters`;
      return { status: 414, body: { error: 'uri-too-long', message: `a path parameter is longer than the limit${limit} (an incident id, percent-encoded, fits); the path begins ${pathOf(request)}` } };
    }
    case 'FST_ERR_BAD_URL':
      return { status: 400, body: { error: 'bad-request', message: `the path is not valid percent-encoding: ${pathOf(request)}` } };
    default:
      return { status, body: { error: WORDS[status] ?? 'bad-request', message: echoed(error.message, 300) } };
  }
}

/** The answer to a path no route serves. */
export function notFound(request: FastifyRequest): ErrorBody {
  const path = pathOf(request);
  // The pages are registered for every /ack/… path whenever they are served: here they are not. The token is a
  // credential and is not echoed.
  if (path.startsWith('/ack/')) return { error: 'not-found', message: `no route for ${request.method} /ack/…: this server serves no acknowledgement pages (wearshift api and serve do, while channels.ackLinks is configured)` };
  // An incident id holds "/": sent as it is, it splits into segments no route knows.
  const hint = /^\/v1\/incidents\/[^/]+\/./.test(path) ? '; an incident id holds "/" and must be percent-encoded in the path (%2F)' : '';
  return { error: 'not-found', message: `no route for ${request.method} ${path}${hint}` };
}
