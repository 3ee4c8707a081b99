import type { FastifyInstance } from 'fastify';
import { listGauges } from '../store/gauges-repo.ts';
import { latestSummaries } from '../store/forecasts-repo.ts';
import { listGaugeStatuses } from '../store/gauge-status-repo.ts';
import { CAUTION } from '../services/caution.ts';
import { addRoute, type Services } from './context.ts';
import { isoUtc } from '../services/series-input.ts';

/** All gauges at a glance: each one's newest run and its highest probability per threshold. */
export async function overviewRoutes(app: FastifyInstance, { services }: { services: Services }) {
  const { db } = services;
  addRoute(app, services, { method: 'GET', url: '/overview', summary: "Every gauge with its newest run's highest exceedance probability per threshold and its status", tag: 'forecasts', role: 'read' }, async () => {
    const gauges = new Map((await listGauges(db)).map((g) => [g.id, g]));
    const rows = await latestSummaries(db);
    // Drift status as last stored by the drift watch (src/services/drift.ts).
    const drift = await listGaugeStatuses(db);
    return {
      caution: CAUTION,
      attentionLevel: services.config.ATTENTION_LEVEL,
      gauges: rows.map((r) => {
        const g = gauges.get(r.gauge_id)!;
        const summary = r.summary ?? [];
        return {
          id: g.id,
          name: g.name,
          status: r.id ? (drift.get(g.id)?.status ?? 'insufficient-data') : 'no-forecast',
          latest: r.id ? { id: r.id, issueTime: isoUtc(r.issue_time!.getTime()), status: r.status } : null,
          thresholds: g.thresholds.map((t) => {
            const s = summary.find((x) => x.label === t.label);
            return { label: t.label, value: t.value, level: t.level, maxExceedance: s?.maxExceedance ?? null, anyTime: s?.anyTime ?? null, attention: s?.attention ?? false };
          }),
        };
      }),
    };
  });
}
