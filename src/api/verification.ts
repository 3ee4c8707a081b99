import type { FastifyInstance } from 'fastify';
import { z } from 'zod';
import { settleGaugeStatusRefreshes } from '../services/drift.ts';
import { verifyStoredRuns } from '../services/verify-runs.ts';
import { getGaugeStatus } from '../store/gauge-status-repo.ts';
import { GaugeParams, requireGauge } from './archive-common.ts';
import { addRoute, type Services } from './context.ts';
import { chooseFormat, FormatOnly } from './formats.ts';
import { byUpdatingRows, byUpdatingText, scoresCsv, scoresText, sendReport, warningsText, type ReportNote } from './report-formats.ts';
import { warningRows } from './warning-tables.ts';
import { GaugeStatusAnswer, Rfc3339 } from './schemas.ts';
import { rfc3339Ms } from '../core/rfc3339.ts';

const VerificationQuery = z
  .strictObject({
    /** Issue-time window [from, to). */
    from: Rfc3339.optional(),
    to: Rfc3339.optional(),
    /** Lead times kept, in steps after issue time (1 = first). */
    minLead: z.coerce.number().int().min(1).max(100_000).optional(),
    maxLead: z.coerce.number().int().min(1).max(100_000).optional(),
    /** Only runs from this forecast source. */
    source: z.string().min(1).max(64).optional(),
    format: FormatOnly,
  })
  .refine((q) => !(q.from && q.to) || rfc3339Ms(q.from) < rfc3339Ms(q.to), { message: 'from must be before to', path: ['to'] })
  .refine((q) => q.minLead === undefined || q.maxLead === undefined || q.minLead <= q.maxLead, { message: 'minLead must not exceed maxLead', path: ['maxLead'] });

export async function verificationRoutes(app: FastifyInstance, { services }: { services: Services }) {
  const { db } = services;

  addRoute(
    app,
    services,
    {
      method: 'GET',
      url: '/gauges/:id/verification',
      summary: 'Stored runs against the observations posted since: raw, corrected and stochastic side by side, with PIT, reliability and coverage data and the stochastic-stage advice; the warnings (Brier parts, reliability diagram, ROC, economic value, attention-flag hits and false alarms, skill against climatology and persistence) with block-bootstrap intervals (JSON, CSV or text)',
      tag: 'verification',
      role: 'read',
      params: GaugeParams,
      query: VerificationQuery,
      response: z.looseObject({
        gaugeId: z.string(),
        unit: z.literal('m3/s'),
        window: z.object({ from: z.string().nullable(), to: z.string().nullable() }),
        leadRange: z.object({ min: z.number().nullable(), max: z.number().nullable() }),
        source: z.string().nullable(),
        runs: z.looseObject({ total: z.number(), verified: z.number() }),
        degraded: z.looseObject({ runs: z.number(), cases: z.number() }),
        thresholds: z.array(z.object({ label: z.string(), value: z.number() })),
        comparison: z.looseObject({}).describe('raw, corrected and stochastic scores side by side'),
        advice: z.looseObject({ recommendation: z.string() }),
        warningScores: z.looseObject({}).nullable(),
        caution: z.string(),
        notes: z.array(z.string()),
        drift: GaugeStatusAnswer.nullable(),
      }),
      responseTypes: ['application/json', 'text/csv', 'text/plain'],
    },
    async (req, reply) => {
      const gauge = await requireGauge(db, req.params);
      const q = req.query;
      const v = await verifyStoredRuns(db, gauge, {
        fromMs: q.from ? rfc3339Ms(q.from) : undefined,
        toMs: q.to ? rfc3339Ms(q.to) : undefined,
        minLead: q.minLead,
        maxLead: q.maxLead,
        source: q.source,
        attentionLevel: services.config.ATTENTION_LEVEL,
      }, undefined, services.pool);
      const drift = await getGaugeStatus(db, gauge.id);
      const header = [
        `${gauge.name} (${gauge.id}) — verification of stored runs, issued ${v.window.from ?? 'any time'} to ${v.window.to ?? 'now'}, lead times ${v.leadRange.min ?? 1}–${v.leadRange.max ?? 'all'} steps; flows in m3/s`,
        `${v.runs.total} runs (${v.runs.verified} with observations), ${v.comparison.cases.used} verified cases; ${v.degraded.runs} degraded runs left out (${v.degraded.cases} cases)`,
      ];
      return sendReport(
        reply,
        chooseFormat(req, q.format),
        `${gauge.id}-verification`,
        { ...v, drift },
        () => scoresCsv(v.comparison, [...header.map((h): ReportNote => ['about', h]), ['advice', v.advice.recommendation], ['note', v.stochasticFrom], ['caution', v.caution]], [...(v.warningScores ? warningRows(v.warningScores) : []), ...byUpdatingRows(v.byUpdating)]),
        () => `${scoresText(header, v.comparison, v.advice, [v.stochasticFrom, ...v.notes])}\n${byUpdatingText(v.byUpdating)}${warningsText(v.warningScores)}\n\n${v.caution}\n`,
      );
    },
  );

  // Refreshes the observations started must finish before the store closes.
  app.addHook('onClose', async () => settleGaugeStatusRefreshes(db));
}
