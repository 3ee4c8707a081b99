import type { FastifyInstance } from 'fastify';
import { listGaugeStatuses } from '../store/gauge-status-repo.ts';
import { listGauges } from '../store/gauges-repo.ts';
import { addRoute, type Services } from './context.ts';

/** Prometheus text format (scrapers send a read token), written by prom-client. */
export async function metricsRoutes(app: FastifyInstance, { services }: { services: Services }) {
  const { pool, metrics, events } = services;
  metrics.observe({
    cache: () => ({ hits: pool.stats.modelCacheHits, misses: pool.stats.modelCacheMisses }),
    queue: () => pool.waiting,
    subscribers: () => events.openStreams,
  });
  addRoute(app, services, { method: 'GET', url: '/metrics', summary: 'Metrics in the Prometheus text format: the service\'s own (sft_*) and the process, event-loop and GC metrics of prom-client', tag: 'health', role: 'read', responseTypes: ['text/plain'] }, async (_req, reply) => {
    // Drift per gauge from the stored statuses, so every instance reports the same (a deleted gauge drops out).
    const statuses = await listGaugeStatuses(services.db);
    metrics.drift.reset();
    for (const g of await listGauges(services.db)) metrics.drift.set({ gauge: g.id }, statuses.get(g.id)?.status === 'drifting' ? 1 : 0);
    reply.type(metrics.contentType);
    return metrics.render();
  });
}
