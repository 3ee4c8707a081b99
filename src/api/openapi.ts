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
  response?: z.ZodType;
  responseTypes?: string[];
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
        responses: {
          '2XX': {
            description: 'success',
            content: Object.fromEntries(
              (r.responseTypes ?? ['application/json']).map((t) => [
                t,
                t === 'application/json' && r.response ? { schema: toSchema(r.response, 'output') } : {},
              ]),
            ),
          },
          default: {
            description: 'problem details (RFC 9457)',
            content: { 'application/problem+json': { schema: { $ref: '#/components/schemas/Problem' } } },
          },
        },
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
        securitySchemes: { bearer: { type: 'http', scheme: 'bearer' } },
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

function toSchema(schema: z.ZodType, io: 'input' | 'output'): unknown {
  try {
    const out = z.toJSONSchema(schema, { io, unrepresentable: 'any' }) as Record<string, unknown>;
    delete out.$schema;
    return out;
  } catch {
    return {};
  }
}
