import type { FastifyInstance } from 'fastify';
import { listGaugeStatuses } from '../store/gauge-status-repo.ts';
import { listGauges } from '../store/gauges-repo.ts';
import { addRoute, type Services } from './context.ts';

/** Prometheus text format (scrapers send a read token). */
export async function metricsRoutes(app: FastifyInstance, { services }: { services: Services }) {
  addRoute(app, services, { method: 'GET', url: '/metrics', summary: 'Metrics in the Prometheus text format', tag: 'health', role: 'read', responseTypes: ['text/plain'] }, async (_req, reply) => {
    const { pool, metrics, events } = services;
    // Drift per gauge from the stored statuses, so every instance reports the same.
    const statuses = await listGaugeStatuses(services.db);
    for (const g of await listGauges(services.db)) metrics.drift.set({ gauge: g.id }, statuses.get(g.id)?.status === 'drifting' ? 1 : 0);
    const s = pool.stats;
    const extra = [
      '# HELP sft_model_cache_total Correction requests whose worker already held the model (hit) or had to load it (miss)',
      '# TYPE sft_model_cache_total counter',
      `sft_model_cache_total{result="hit"} ${s.modelCacheHits}`,
      `sft_model_cache_total{result="miss"} ${s.modelCacheMisses}`,
      '# HELP sft_correction_queue Corrections waiting or running now',
      '# TYPE sft_correction_queue gauge',
      `sft_correction_queue ${pool.waiting}`,
      '# HELP sft_event_subscribers Open server-sent-event streams',
      '# TYPE sft_event_subscribers gauge',
      `sft_event_subscribers ${events.subscribers}`,
    ];
    reply.type('text/plain; version=0.0.4; charset=utf-8');
    return metrics.render(extra);
  });
}
