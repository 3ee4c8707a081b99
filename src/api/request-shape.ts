// Requests of the wrong shape: some are refused by Node's HTTP parser or fastify's router before any
// route or error handler runs, so each of those paths is given problem details here. Also the one
// place that keeps a token sent in a URL out of logs and answers.
import { STATUS_CODES } from 'node:http';
import type { Socket } from 'node:net';
import type { FastifyReply, FastifyRequest } from 'fastify';
import { Problem } from '../services/problem.ts';

/** Our bodies nest a few levels; anything this deep is not one of them (and costs stack to walk). */
export const MAX_JSON_DEPTH = 64;

/** Longest request target answered; longer ones get 414 (Node's own header limit, 16 KiB, answers 431 beyond). */
export const MAX_URL_LENGTH = 8192;

/** Query parameters that carry credentials in other APIs: refused, redacted in logs, never echoed. */
const CREDENTIAL_PARAMS = new Set(['token', 'access_token', 'accesstoken', 'api_key', 'apikey', 'bearer', 'auth', 'authorization']);

/** How deep the JSON text nests (brackets outside strings), stopping once past `limit`. */
export function jsonDepthExceeds(text: string, limit = MAX_JSON_DEPTH): boolean {
  let depth = 0;
  let inString = false;
  for (let i = 0; i < text.length; i++) {
    const c = text.charCodeAt(i);
    if (inString) {
      if (c === 92) i++; // backslash: skip the escaped character
      else if (c === 34) inString = false;
    } else if (c === 34) inString = true;
    else if (c === 91 || c === 123) {
      if (++depth > limit) return true;
    } else if (c === 93 || c === 125) depth--;
  }
  return false;
}

export const tooDeep = () =>
  new Problem(400, 'malformed-body', 'Malformed body', `the JSON body nests deeper than ${MAX_JSON_DEPTH} levels; no request of this API needs that`, [
    { path: 'body', message: `nested deeper than ${MAX_JSON_DEPTH} levels` },
  ]);

/** The one secret a URL may carry: a short-lived stream ticket (src/api/stream-tickets.ts), redacted from logs too. */
export const STREAM_TICKET_PARAM = 'ticket';

/** The URL with the values of credential parameters (and stream tickets) replaced, for logs. */
export function redactedUrl(url: string): string {
  const q = url.indexOf('?');
  if (q < 0) return url;
  const parts = url.slice(q + 1).split('&').map((pair) => {
    const eq = pair.indexOf('=');
    const name = decodeSafe(eq < 0 ? pair : pair.slice(0, eq)).toLowerCase();
    return CREDENTIAL_PARAMS.has(name) || name === STREAM_TICKET_PARAM ? `${pair.slice(0, eq < 0 ? pair.length : eq)}=[redacted]` : pair;
  });
  return `${url.slice(0, q)}?${parts.join('&')}`;
}

/** The path of a URL, for problem `instance` fields: a query is never echoed. */
export function pathOf(url: string): string {
  return url.split('?')[0];
}

function decodeSafe(s: string): string {
  try {
    return decodeURIComponent(s.replace(/\+/g, ' '));
  } catch {
    return s;
  }
}

function credentialParams(url: string): string[] {
  const q = url.indexOf('?');
  if (q < 0) return [];
  return url
    .slice(q + 1)
    .split('&')
    .map((pair) => decodeSafe(pair.split('=')[0]).toLowerCase())
    .filter((name) => CREDENTIAL_PARAMS.has(name));
}

/** pino serializer for requests: fastify's fields, with credential parameters redacted. */
export function requestSerializer(req: FastifyRequest) {
  return {
    method: req.method,
    url: redactedUrl(req.url),
    host: req.host,
    remoteAddress: req.ip,
    remotePort: req.socket ? req.socket.remotePort : undefined,
  };
}

/**
 * First hook of every request: a URL too long to be a real request gets 414, and a credential in
 * the query string is refused (it would end up in proxy logs, browser history and referrers).
 */
export async function checkRequestTarget(request: FastifyRequest): Promise<void> {
  const url = request.raw.url ?? '';
  if (url.length > MAX_URL_LENGTH) {
    throw new Problem(414, 'uri-too-long', 'URI too long', `the request target is ${url.length} characters; at most ${MAX_URL_LENGTH} are answered`);
  }
  const names = credentialParams(url);
  if (names.length) {
    throw new Problem(
      400,
      'token-in-url',
      'Token in URL',
      'access tokens are accepted only in the Authorization header (Authorization: Bearer <token>), never in the URL, where logs and browser history keep them; the request was not served. If the token went over a path you do not control, revoke it.',
      names.map((n) => ({ path: `query.${n}`, message: 'send the token in the Authorization header instead' })),
    );
  }
}

/** Errors fastify's router raises before any route runs (bad percent-encoding, an over-long path parameter). */
export function frameworkErrors(error: Error & { code?: string }, request: FastifyRequest, reply: FastifyReply): void {
  const problem =
    error.code === 'FST_ERR_MAX_PARAM_LENGTH'
      ? new Problem(414, 'uri-too-long', 'URI too long', 'a path segment is longer than any identifier of this API')
      : error.code === 'FST_ERR_BAD_URL'
        ? new Problem(400, 'bad-request', 'Bad request', 'the path is not validly percent-encoded')
        : new Problem(400, 'bad-request', 'Bad request', 'the request could not be routed');
  reply.code(problem.status).type('application/problem+json').send(problem.body(pathOf(request.url)));
}

/**
 * Errors Node's HTTP parser raises before fastify sees a request (headers too large, a malformed
 * request line, a client too slow): answered on the socket with problem details, then closed.
 */
export function clientErrorHandler(err: Error & { code?: string }, socket: Socket): void {
  if (err.code === 'ECONNRESET' || socket.destroyed) return;
  const [status, slug, detail] =
    err.code === 'HPE_HEADER_OVERFLOW'
      ? [431, 'headers-too-large', 'the request line and headers together exceed 16 KiB']
      : err.code === 'ERR_HTTP_REQUEST_TIMEOUT'
        ? [408, 'request-timeout', 'the request did not arrive in time']
        : [400, 'bad-request', 'the request is not valid HTTP/1.1'];
  const title = STATUS_CODES[status] ?? 'Error';
  const body = JSON.stringify(new Problem(status, slug, title, detail).body());
  if (socket.writable) {
    socket.write(`HTTP/1.1 ${status} ${title}\r\nContent-Type: application/problem+json\r\nContent-Length: ${Buffer.byteLength(body)}\r\nConnection: close\r\n\r\n${body}`);
  }
  socket.destroy(err);
}
