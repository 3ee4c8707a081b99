import type { FastifyInstance, FastifyReply, FastifyRequest } from 'fastify';
import type { z } from 'zod';
import type { Config } from '../config.ts';
import type { CorrectionPool } from '../workers/correction-pool.ts';
import type { Db } from '../store/db.ts';
import type { ForecastEvents } from './forecast-events.ts';
import type { Metrics } from './metrics-registry.ts';
import type { TokenRevocations } from './token-revocations.ts';
import type { ApiDocs, RouteDoc } from './openapi.ts';
import { parseWith } from './validate.ts';

/** What every resource plugin is given. */
export interface Services {
  db: Db;
  config: Config;
  docs: ApiDocs;
  pool: CorrectionPool;
  metrics: Metrics;
  events: ForecastEvents;
  revocations: TokenRevocations;
}

type Parsed<S> = S extends z.ZodType ? z.output<S> : unknown;

/** A request whose params, query and body are what the route's schemas made of them. */
export type TypedRequest<D extends RouteDoc> = FastifyRequest<{
  Params: Parsed<D['params']>;
  Querystring: Parsed<D['query']>;
  Body: D['bodyDecodedByHandler'] extends true ? unknown : Parsed<D['body']>;
}>;

export type Handler<D extends RouteDoc> = (request: TypedRequest<D>, reply: FastifyReply) => Promise<unknown>;

/**
 * Registers a route and its documentation together, so the OpenAPI document cannot drift. The
 * route's zod schemas are applied once, here (params, then query, then body): the handler receives
 * the parsed values, and a bad request gets a 422 problem naming each offending field.
 */
export function addRoute<const D extends RouteDoc>(app: FastifyInstance, services: Services, doc: D, handler: Handler<D>): void {
  services.docs.add({ ...doc, url: `${app.prefix}${doc.url}` });
  app.route({
    method: doc.method,
    url: doc.url,
    config: { role: doc.role, acceptsStreamTicket: doc.acceptsStreamTicket === true },
    handler: async (req, reply) => {
      if (doc.params) req.params = parseWith(doc.params, req.params, 'params');
      if (doc.query) req.query = parseWith(doc.query, req.query, 'query');
      if (doc.body && !doc.bodyDecodedByHandler) req.body = parseWith(doc.body, req.body ?? (doc.bodyOptional ? {} : undefined), 'body');
      return handler(req as TypedRequest<D>, reply);
    },
  });
}

declare module 'fastify' {
  interface FastifyContextConfig {
    role?: RouteDoc['role'];
    /** The route may be opened with a stream ticket (?ticket=) instead of a bearer token. */
    acceptsStreamTicket?: boolean;
  }
  interface FastifyRequest {
    principal?: { tokenId: string; role: 'admin' | 'ingest' | 'read' } | null;
  }
}
