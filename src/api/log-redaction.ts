import type { FastifyBaseLogger } from 'fastify';

/** Query parameters whose values are secrets and never reach a log line. */
export const SECRET_QUERY_PARAMS = ['ticket'];

/** The URL with each secret query parameter's value replaced by `[redacted]`. */
export function redactUrl(url: string): string {
  const q = url.indexOf('?');
  if (q < 0) return url;
  const parts = url.slice(q + 1).split('&').map((pair) => {
    const eq = pair.indexOf('=');
    const name = decodeURIComponentSafe(eq < 0 ? pair : pair.slice(0, eq));
    return SECRET_QUERY_PARAMS.includes(name) ? `${pair.slice(0, eq < 0 ? pair.length : eq)}=[redacted]` : pair;
  });
  return `${url.slice(0, q)}?${parts.join('&')}`;
}

function decodeURIComponentSafe(s: string): string {
  try {
    return decodeURIComponent(s.replace(/\+/g, ' '));
  } catch {
    return s;
  }
}

interface RequestLike {
  method?: string;
  url?: string;
  host?: string;
  ip?: string;
  socket?: { remotePort?: number };
}

/**
 * A child logger whose request serializer writes the URL without secrets; fastify takes a logger
 * instance's own `req` serializer over its default one.
 */
export function withRedactedUrls(logger: FastifyBaseLogger): FastifyBaseLogger {
  return logger.child(
    {},
    {
      serializers: {
        req: (req: RequestLike) => ({
          method: req.method,
          url: redactUrl(req.url ?? ''),
          host: req.host,
          remoteAddress: req.ip,
          remotePort: req.socket?.remotePort,
        }),
      },
    },
  );
}
