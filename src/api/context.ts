import type { FastifyInstance, FastifyReply, FastifyRequest } from 'fastify';
import type { Config } from '../config.ts';
import type { CorrectionPool } from '../workers/correction-pool.ts';
import type { Db } from '../store/db.ts';
import type { ForecastEvents } from './forecast-events.ts';
import type { Metrics } from './metrics-registry.ts';
import type { ApiDocs, RouteDoc } from './openapi.ts';

/** What every resource plugin is given. */
export interface Services {
  db: Db;
  config: Config;
  docs: ApiDocs;
  pool: CorrectionPool;
  metrics: Metrics;
  events: ForecastEvents;
}

export type Handler = (request: FastifyRequest, reply: FastifyReply) => Promise<unknown>;

/** Registers a route and its documentation together, so the OpenAPI document cannot drift. */
export function addRoute(app: FastifyInstance, services: Services, doc: RouteDoc, handler: Handler): void {
  services.docs.add({ ...doc, url: `${app.prefix}${doc.url}` });
  app.route({ method: doc.method, url: doc.url, config: { role: doc.role }, handler });
}

declare module 'fastify' {
  interface FastifyContextConfig {
    role?: RouteDoc['role'];
  }
  interface FastifyRequest {
    principal?: { tokenId: string; role: 'admin' | 'ingest' | 'read' } | null;
  }
}
