import type { FastifyInstance } from 'fastify';
import { z } from 'zod';
import { parseDurationSeconds } from '../core/iso-duration.ts';
import { archiveCounts, dataCounts, deleteGauge, getGauge, insertGauge, listGaugesAfter, updateGauge, type Gauge, type GaugeInput } from '../store/gauges-repo.ts';
import { FLOAT32_MAX, limitsInForce } from '../services/plausible-values.ts';
import { getGaugeStatus } from '../store/gauge-status-repo.ts';
import { hasRuns } from '../store/verification-repo.ts';
import { addRoute, type Services } from './context.ts';
import { conflict, notFound } from '../services/problem.ts';
import { checkThresholds } from '../services/rating.ts';
import { decodeCursor, encodeCursor, NextCursor, pageQuery } from './pagination.ts';
import { FlowUnit, GaugeAnswer, GaugeDetailAnswer, GaugeId, IsoDuration, Location, Thresholds, TimeZone } from './schemas.ts';

const GaugeFields = {
  name: z.string().trim().min(1).max(200),
  catchmentAreaKm2: z.number().finite().positive(),
  timeStep: IsoDuration,
  timeZone: TimeZone,
  flowUnit: FlowUnit,
  location: Location.nullable().optional(),
  thresholds: Thresholds,
  /** Issue-time updating uses the latest observation at most this many steps before a run's issue time. */
  updatingMaxAgeSteps: z.number().int().min(0).max(1000),
  /** Plausible values, refused above (flow and precipitation) or outside (temperature); null = derived or default. */
  maxFlow: z.number().finite().positive().max(FLOAT32_MAX).nullable(),
  maxPrecipitation: z.number().finite().positive().max(FLOAT32_MAX).nullable(),
  airTemperatureRange: z
    .strictObject({ min: z.number().min(-273.15).max(100), max: z.number().min(-273.15).max(100) })
    .refine((r) => r.min < r.max, { message: 'max must be above min', path: ['max'] })
    .nullable(),
};

const GaugeCreate = z.strictObject({
  id: GaugeId,
  ...GaugeFields,
  thresholds: Thresholds.default([]),
  timeZone: TimeZone.default('UTC'),
  updatingMaxAgeSteps: GaugeFields.updatingMaxAgeSteps.default(2),
  maxFlow: GaugeFields.maxFlow.default(null),
  maxPrecipitation: GaugeFields.maxPrecipitation.default(null),
  airTemperatureRange: GaugeFields.airTemperatureRange.default(null),
});
const GaugePatch = z.strictObject(GaugeFields).partial();
const Params = z.object({ id: GaugeId });
const ListQuery = z.strictObject(pageQuery(100, 1000));
/** Where a page of gauges ended (they come in id order). */
const GaugesCursor = z.strictObject({ after: GaugeId });
const DeleteQuery = z.strictObject({ force: z.enum(['true', 'false']).optional() });

/**
 * A gauge as answered: its fields, and the value limits in force (src/services/plausible-values.ts),
 * so an operator sees what a batch will be held to; the archive's raw maximum stays inside.
 */
function gaugeView(g: Gauge) {
  const { archiveMaxFlow: _inside, ...fields } = g;
  return { ...fields, limitsInForce: limitsInForce(g) };
}

export async function gaugeRoutes(app: FastifyInstance, { services }: { services: Services }) {
  const { db } = services;

  addRoute(app, services, { method: 'POST', url: '/gauges', summary: 'Create a gauge', tag: 'gauges', role: 'admin', body: GaugeCreate, response: GaugeAnswer, status: 201 }, async (req, reply) => {
    const body = req.body;
    const input: GaugeInput = {
      ...body,
      location: body.location ?? null,
      stepSeconds: parseDurationSeconds(body.timeStep)!,
    };
    return db.transaction(async (tx) => {
      if (await getGauge(tx, body.id, true)) throw conflict(`gauge ${body.id} exists; change it with PATCH /gauges/${body.id}`, [{ path: 'body.id', message: 'already exists' }]);
      await checkThresholds(tx, body.id, body.thresholds);
      const gauge = await insertGauge(tx, input);
      reply.code(201).header('location', `/gauges/${gauge.id}`);
      return gaugeView(gauge);
    });
  });

  addRoute(app, services, { method: 'GET', url: '/gauges', summary: 'Gauges in id order, a page at a time (limit, cursor → next)', tag: 'gauges', role: 'read', query: ListQuery, response: z.object({ gauges: z.array(GaugeAnswer), next: NextCursor }) }, async (req) => {
    const { limit, cursor } = req.query;
    const after = cursor === undefined ? null : decodeCursor(cursor, GaugesCursor).after;
    const rows = await listGaugesAfter(db, after, limit + 1);
    const gauges = rows.slice(0, limit).map(gaugeView);
    return { gauges, next: rows.length > limit ? encodeCursor({ after: gauges[gauges.length - 1].id }) : null };
  });

  addRoute(app, services, { method: 'GET', url: '/gauges/:id', summary: 'One gauge with the size of its archive', tag: 'gauges', role: 'read', params: Params, response: GaugeDetailAnswer }, async (req) => {
    const { id } = req.params;
    const gauge = await getGauge(db, id);
    if (!gauge) throw notFound(`no gauge ${id}`);
    // status as in the overview: no-forecast, else the drift watch's ok / drifting / insufficient-data.
    const drift = await getGaugeStatus(db, id);
    const status = (await hasRuns(db, id)) ? (drift?.status ?? 'insufficient-data') : 'no-forecast';
    return { ...gaugeView(gauge), archive: await archiveCounts(db, id), status, drift };
  });

  addRoute(app, services, { method: 'PATCH', url: '/gauges/:id', summary: 'Change a gauge', tag: 'gauges', role: 'admin', params: Params, body: GaugePatch, response: GaugeAnswer }, async (req) => {
    const { id } = req.params;
    const patch = req.body;
    return db.transaction(async (tx) => {
      const gauge = await getGauge(tx, id, true);
      if (!gauge) throw notFound(`no gauge ${id}`);
      if (patch.thresholds) await checkThresholds(tx, id, patch.thresholds);
      const next: GaugeInput = { ...gauge, ...patch, location: patch.location === undefined ? gauge.location : patch.location };
      next.stepSeconds = parseDurationSeconds(next.timeStep)!;
      if (next.stepSeconds !== gauge.stepSeconds) {
        const counts = await archiveCounts(tx, id);
        if (Object.values(counts).some((n) => n > 0)) {
          throw conflict('the time step cannot change while the gauge holds archive data', [{ path: 'body.timeStep', message: `archive holds ${JSON.stringify(counts)}` }]);
        }
      }
      return gaugeView(await updateGauge(tx, next));
    });
  });

  addRoute(app, services, { method: 'DELETE', url: '/gauges/:id', summary: 'Delete a gauge (refused while it holds data unless force=true)', tag: 'gauges', role: 'admin', params: Params, query: DeleteQuery, status: 204 }, async (req, reply) => {
    const { id } = req.params;
    const { force } = req.query;
    await db.transaction(async (tx) => {
      if (!(await getGauge(tx, id, true))) throw notFound(`no gauge ${id}`);
      const counts = await dataCounts(tx, id);
      if (force !== 'true' && Object.values(counts).some((n) => n > 0)) {
        throw conflict(`gauge ${id} holds data; repeat with ?force=true to delete it and all its data`, [
          { path: 'query.force', message: `archive holds ${JSON.stringify(counts)}` },
        ]);
      }
      await deleteGauge(tx, id);
    });
    reply.code(204);
  });
}
