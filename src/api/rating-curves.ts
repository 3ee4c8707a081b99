import type { FastifyInstance } from 'fastify';
import { z } from 'zod';
import { listRatingCurves } from '../store/rating-repo.ts';
import { addRatingCurve, ratingCurveView, removeRatingCurve } from '../services/rating.ts';
import { GaugeParams, requireGauge } from './archive-common.ts';
import { addRoute, type Services } from './context.ts';
import { GaugeId, Rfc3339 } from './schemas.ts';

const Segment = z.strictObject({
  fromStage: z.number().finite().describe('lowest stage of the segment, m'),
  toStage: z.number().finite().describe('highest stage of the segment, m'),
  a: z.number().finite().describe('coefficient of Q = a·(h − h0)^b, flow in m3/s'),
  b: z.number().finite().describe('exponent'),
  h0: z.number().finite().describe('stage of zero flow of this segment, m'),
});

const RatingCurveBody = z.strictObject({
  validFrom: Rfc3339.describe('the curve applies to runs issued from this time until the next version'),
  stageUnit: z.literal('m').default('m'),
  flowUnit: z.literal('m3/s').default('m3/s'),
  segments: z.array(Segment).min(1).max(20),
  /** Largest relative difference of the two segments' flows at a join. */
  joinTolerance: z.number().min(0).max(0.1).default(0.01),
  note: z.string().trim().min(1).max(200).optional(),
});

const RatingCurveAnswer = z.object({
  gaugeId: z.string(),
  validFrom: z.string(),
  units: z.object({ stage: z.literal('m'), flow: z.literal('m3/s') }),
  segments: z.array(Segment),
  stageRange: z.object({ from: z.number(), to: z.number() }),
  flowRange: z.object({ from: z.number(), to: z.number() }),
  joinTolerance: z.number(),
  joins: z.array(z.object({ stage: z.number(), flowBelow: z.number(), flowAbove: z.number(), relativeJump: z.number() })).describe("each join's flow from the segment below and above"),
  note: z.string().nullable(),
  createdAt: z.string(),
});

const RatingCurveList = z.object({
  gaugeId: z.string(),
  inForce: z.string().nullable().describe('validFrom of the version in force now'),
  versions: z.array(RatingCurveAnswer),
});

const VersionParams = z.object({ id: GaugeId, validFrom: Rfc3339 });

/** A gauge's rating curves (stage → flow), versioned by valid-from time; use cases in src/services/rating.ts. */
export async function ratingCurveRoutes(app: FastifyInstance, { services }: { services: Services }) {
  const { db } = services;

  addRoute(app, services, { method: 'POST', url: '/gauges/:id/rating-curves', summary: 'Add a rating curve version (piecewise Q = a·(h − h0)^b)', tag: 'gauges', role: 'admin', params: GaugeParams, body: RatingCurveBody, response: RatingCurveAnswer }, async (req, reply) => {
    const { id } = req.params;
    const { validFrom, segments, joinTolerance, note } = req.body;
    const answer = await db.transaction((tx) => addRatingCurve(tx, id, { validFrom, segments, joinTolerance, note }));
    reply.code(answer.created ? 201 : 200).header('location', `/gauges/${id}/rating-curves`);
    return answer.curve;
  });

  addRoute(app, services, { method: 'GET', url: '/gauges/:id/rating-curves', summary: "A gauge's rating curve versions and the one in force now", tag: 'gauges', role: 'read', params: GaugeParams, response: RatingCurveList }, async (req) => {
    const gauge = await requireGauge(db, req.params);
    return { gaugeId: gauge.id, inForce: gauge.ratingCurve?.validFrom ?? null, versions: (await listRatingCurves(db, gauge.id)).map(ratingCurveView) };
  });

  addRoute(app, services, { method: 'DELETE', url: '/gauges/:id/rating-curves/:validFrom', summary: 'Delete a rating curve version', tag: 'gauges', role: 'admin', params: VersionParams }, async (req, reply) => {
    const { id, validFrom } = req.params;
    await db.transaction((tx) => removeRatingCurve(tx, id, validFrom));
    reply.code(204);
  });
}
