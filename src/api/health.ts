import type { FastifyInstance } from 'fastify';
import { addRoute, type Services } from './context.ts';
import { STORE_RETRY_AFTER_S } from './overload.ts';

export async function healthRoutes(app: FastifyInstance, { services }: { services: Services }) {
  addRoute(app, services, { method: 'GET', url: '/healthz', summary: 'The process is alive', tag: 'health', role: 'open' }, async () => ({
    status: 'ok',
  }));
  addRoute(app, services, { method: 'GET', url: '/readyz', summary: 'The database answers', tag: 'health', role: 'open' }, async (_req, reply) => {
    try {
      await services.db.query('select 1');
      return { status: 'ready', store: services.db.kind };
    } catch (err) {
      reply.code(503).type('application/problem+json').header('retry-after', String(STORE_RETRY_AFTER_S));
      return { type: '/problems/not-ready', title: 'Not ready', status: 503, detail: `database: ${(err as Error).message}` };
    }
  });
}
