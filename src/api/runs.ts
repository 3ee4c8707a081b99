import type { FastifyInstance } from 'fastify';
import { z } from 'zod';
import { RunCorrection } from '../services/correct-run.ts';
import { serverTiming } from '../services/stage-clock.ts';
import { GaugeParams, requireGauge } from './archive-common.ts';
import { addRoute, type Services } from './context.ts';
import { MemberId, Rfc3339 } from './schemas.ts';

export const RunBody = z.strictObject({
  issueTime: Rfc3339,
  /** Which forecast system or cycle made the run; with gauge and issue time it names the run. */
  source: z.string().regex(/^[A-Za-z0-9][A-Za-z0-9_.:-]{0,63}$/, 'letters, digits and _ . : - (1–64)').default('default'),
  unit: z.string(),
  /** How many of each member's first values are at or before issue time (for lag features). */
  warmupSteps: z.number().int().min(0).max(1000).default(0),
  members: z.array(z.strictObject({ id: MemberId, values: z.array(z.unknown()).min(1).max(5000) })).min(1).max(1000),
  /** Forecast forcings laid out like the members' values (warm-up then lead times). */
  forcings: z.record(z.string().regex(/^[a-z][a-z0-9_]{0,47}$/), z.array(z.unknown())).optional(),
  /**
   * Observed flow at issue time: the run is updated on it (it wins over the stored observations)
   * and it is stored with the run; also read by models that use the last known error.
   */
  issueObservation: z.number().finite().nonnegative().nullable().optional(),
  quantiles: z
    .array(z.number().gt(0).lt(1))
    .min(1)
    .max(99)
    .refine((q) => q.every((p, i) => i === 0 || p > q[i - 1]), 'quantiles must be strictly increasing')
    .optional(),
  trajectories: z.number().int().min(10).optional(),
  seed: z.number().int().min(0).max(2 ** 31 - 1).optional(),
  seasonalWindowDays: z.number().int().min(0).max(183).nullable().default(60),
});

/** POST /gauges/:id/runs: the use case is src/services/correct-run.ts. */
export async function runRoutes(app: FastifyInstance, { services }: { services: Services }) {
  const { db, config, pool, metrics } = services;
  const correction = new RunCorrection({ db, config, pool, metrics });
  // When each request arrived and when its body was read and parsed, for the Server-Timing header.
  const arrived = new WeakMap<object, number>();
  const parsed = new WeakMap<object, number>();
  app.addHook('onRequest', async (req) => {
    arrived.set(req, performance.now());
  });
  app.addHook('preHandler', async (req) => {
    parsed.set(req, performance.now());
  });

  addRoute(
    app,
    services,
    { method: 'POST', url: '/gauges/:id/runs', summary: 'Post a raw ensemble run; answers with corrected quantiles and exceedance probabilities', tag: 'forecasts', role: 'ingest', params: GaugeParams, body: RunBody },
    async (req, reply) => {
      const started = performance.now();
      const body = req.body;
      const gauge = await requireGauge(db, req.params);
      const key = req.headers['idempotency-key'];
      const answer = await correction.correct(gauge, body, typeof key === 'string' ? key : null, req.log, started);
      if (!answer.created) {
        const { stored } = answer;
        reply.code(200).header('etag', stored.etag).header('idempotent-replayed', 'true').header('location', `/forecasts/${stored.id}`).type('application/json');
        return stored.output;
      }
      const t0 = arrived.get(req) ?? started;
      const t1 = parsed.get(req) ?? started;
      // parse: reading and parsing the body (and the auth hooks); validate: the wire schema.
      const stages = { parse: t1 - t0, ...answer.stageMs, validate: started - t1 + (answer.stageMs.validate ?? 0) };
      reply.header('server-timing', serverTiming({ ...stages, total: performance.now() - t0 }));
      reply.code(201).header('etag', answer.etag).header('location', `/forecasts/${answer.id}`).type('application/json');
      return answer.output;
    },
  );
}
