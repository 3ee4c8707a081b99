import { z } from 'zod';

/** What a route says about itself; the OpenAPI document is built from these and the zod schemas. */
export interface RouteDoc {
  method: 'GET' | 'POST' | 'PUT' | 'PATCH' | 'DELETE';
  url: string;
  summary: string;
  tag: string;
  role: 'admin' | 'ingest' | 'read' | 'open';
  params?: z.ZodObject;
  query?: z.ZodObject;
  body?: z.ZodType;
  /** An empty body means {} (every field has a default). */
  bodyOptional?: boolean;
  /** The handler decodes the body itself (JSON or CSV), so addRoute leaves it as sent; the schema is for the document. */
  bodyDecodedByHandler?: boolean;
  bodyTypes?: string[];
  /** The JSON answer's schema (the OpenAPI document's response schema is generated from it). */
  response?: z.ZodType;
  /** The route may be opened with a stream ticket (?ticket=, from POST /stream-tickets) instead of a bearer token. */
  acceptsStreamTicket?: boolean;
  responseTypes?: string[];
  /** The success status (or statuses); 200 when not given, 204 means no body. */
  status?: number | number[];
}

export class ApiDocs {
  readonly routes: RouteDoc[] = [];

  add(doc: RouteDoc): void {
    this.routes.push(doc);
  }

  document(info: { title: string; version: string; description: string }): Record<string, unknown> {
    const paths: Record<string, Record<string, unknown>> = {};
    for (const r of this.routes) {
      const path = r.url.replace(/:(\w+)/g, '{$1}');
      const parameters: unknown[] = [];
      for (const [where, obj] of [
        ['path', r.params],
        ['query', r.query],
      ] as const) {
        if (!obj) continue;
        for (const [name, schema] of Object.entries(obj.shape)) {
          parameters.push({
            name,
            in: where,
            required: where === 'path' || !(schema as z.ZodType).safeParse(undefined).success,
            schema: toSchema(schema as z.ZodType, 'input'),
          });
        }
      }
      const op: Record<string, unknown> = {
        summary: r.summary,
        tags: [r.tag],
        ...(parameters.length ? { parameters } : {}),
        ...(r.role === 'open' ? { security: [] } : { 'x-required-role': r.role }),
        ...(r.acceptsStreamTicket ? { security: [{ bearer: [] }, { streamTicket: [] }] } : {}),
        responses: responsesOf(r),
      };
      if (r.body) {
        op.requestBody = {
          required: true,
          content: Object.fromEntries(
            (r.bodyTypes ?? ['application/json']).map((t) => [
              t,
              t === 'application/json'
                ? { schema: toSchema(r.body!, 'input') }
                : { schema: t === 'application/x-netcdf' ? { type: 'string', contentMediaType: t, contentEncoding: 'binary' } : { type: 'string' } },
            ]),
          ),
        };
      }
      (paths[path] ??= {})[r.method.toLowerCase()] = op;
    }
    return {
      openapi: '3.1.0',
      info,
      paths,
      components: {
        securitySchemes: {
          bearer: { type: 'http', scheme: 'bearer' },
          streamTicket: { type: 'apiKey', in: 'query', name: 'ticket', description: 'single-use, about a minute, from POST /stream-tickets; GET /events only' },
        },
        schemas: {
          Problem: {
            type: 'object',
            properties: {
              type: { type: 'string' },
              title: { type: 'string' },
              status: { type: 'integer' },
              detail: { type: 'string' },
              errors: {
                type: 'array',
                items: { type: 'object', properties: { path: { type: 'string' }, message: { type: 'string' } } },
              },
            },
          },
        },
      },
      security: [{ bearer: [] }],
    };
  }
}

const problemResponse = (description: string) => ({
  description,
  content: { 'application/problem+json': { schema: { $ref: '#/components/schemas/Problem' } } },
});

/**
 * The success answer(s) in every content type the route offers (JSON from the route's zod
 * schema, other types as text) and the problem answers every route can give.
 */
function responsesOf(r: RouteDoc): Record<string, unknown> {
  const out: Record<string, unknown> = {};
  for (const status of [r.status ?? 200].flat()) {
    if (status === 204) {
      out['204'] = { description: 'done; no content' };
      continue;
    }
    out[String(status)] = {
      description: status === 201 ? 'created' : status === 202 ? 'accepted; follow the job' : 'success',
      content: Object.fromEntries(
        (r.responseTypes ?? ['application/json']).map((t) => [t, { schema: t === 'application/json' ? (r.response ? toSchema(r.response, 'output') : {}) : { type: 'string' } }]),
      ),
    };
  }
  out['4XX'] = problemResponse('problem details (RFC 9457): the request was refused (bad field, no or weak token, not found, conflict); `errors` names each field path or CSV line');
  out['5XX'] = problemResponse('problem details (RFC 9457): the service could not answer now (busy: Retry-After; not ready; internal error)');
  return out;
}

function toSchema(schema: z.ZodType, io: 'input' | 'output'): unknown {
  try {
    const out = z.toJSONSchema(schema, { io, unrepresentable: 'any' }) as Record<string, unknown>;
    delete out.$schema;
    return out;
  } catch {
    return {};
  }
}
