import type { FastifyInstance } from 'fastify';
import { z } from 'zod';
import { activateVersion, rollbackVersion } from '../services/activate-version.ts';
import { evaluateUpload, MAX_UPLOAD_BYTES } from '../services/evaluate-upload.ts';
import { LSTM_DEFAULT_TRAIN_ROWS, LSTM_PARAMS } from '../services/fit.ts';
import { enqueueJob } from '../store/jobs-repo.ts';
import { getModelVersion, listModelVersions, versionArchiveSummaries, type ModelVersion } from '../store/models-repo.ts';
import { GaugeParams, requireGauge } from './archive-common.ts';
import { addRoute, type Services } from './context.ts';
import { notFound } from '../services/problem.ts';
import { JobAnswer, ModelVersionAnswer, Rfc3339 } from './schemas.ts';
import { rfc3339Ms } from '../core/rfc3339.ts';

const PeriodBody = z.strictObject({ from: Rfc3339, to: Rfc3339 }).refine((p) => rfc3339Ms(p.from) < rfc3339Ms(p.to), { message: 'from must be before to', path: ['to'] });

const Transform = z.discriminatedUnion('kind', [
  z.strictObject({ kind: z.literal('none') }),
  z.strictObject({ kind: z.literal('log'), offset: z.number().positive().optional() }),
  // λ < 0 is refused here, before any training: its back-transform runs to infinite flow for large errors.
  z.strictObject({ kind: z.literal('boxcox'), lambda: z.number().min(0, 'Box–Cox needs λ ≥ 0 (λ = 0 is the log); λ < 0 back-transforms large errors to infinite flow').max(2), offset: z.number().positive().optional() }),
]);

const TrainerParams = z.record(z.string(), z.number().finite());

const boostingParams = ['nRounds', 'learningRate', 'maxDepth', 'lambda', 'gamma', 'minChildWeight', 'rowSample', 'colSample', 'maxBins', 'patience', 'baseScore'];
const forestParams = ['nTrees', 'maxDepth', 'mtry', 'minLeafRows', 'sampleFraction', 'maxBins'];

export const FitBody = z.strictObject({
  trainer: z.enum(['gradient-boosting', 'random-forest', 'lstm']).default('gradient-boosting'),
  /** Trainer parameters; unset ones take the trainer's defaults. */
  params: TrainerParams.optional(),
  tuning: z
    .strictObject({ evaluations: z.number().int().min(2).max(100).default(25), initial: z.number().int().min(2).max(50).default(8) })
    .nullable()
    .default(null),
  bundle: z.number().int().min(1).max(10).default(1),
  seed: z.number().int().min(0).max(2 ** 31).default(1),
  calibration: PeriodBody.optional(),
  validation: PeriodBody.optional(),
  simLags: z.number().int().min(0).max(48).default(9),
  forcingLags: z.number().int().min(0).max(48).default(3),
  forcings: z.array(z.string()).optional(),
  seasonal: z.boolean().default(true),
  transform: Transform.default({ kind: 'log' }),
  templateLength: z.number().int().min(1).max(2000).default(240),
  /** Default 200,000 rows for trees, 20,000 windows for the LSTM (its epochs cost far more per row). */
  maxTrainRows: z.number().int().min(100).max(2_000_000).optional(),
  activate: z.boolean().default(true),
  label: z.string().min(1).max(100).optional(),
  /**
   * Issue-time updating on the latest observation. auto: kept at the lead times where the held-out
   * block shows a gain beyond twice its standard error; on: at every lead time; off: none.
   * leads: horizon of the updater (default: templateLength, at most ten days of steps);
   * leadBands: bands of the per-band tree candidate (default 1–2, 3–5, 6–10, 11–20, …);
   * history: earlier errors given to the tree candidates; trees: fit and score the tree candidates.
   */
  updating: z
    .strictObject({
      mode: z.enum(['auto', 'on', 'off']).default('auto'),
      leads: z.number().int().min(1).max(2000).optional(),
      leadBands: z
        .array(z.tuple([z.number().int().min(1), z.number().int().min(1)]).refine(([a, b]) => a <= b, 'a band is [first, last] lead with first ≤ last'))
        .min(1)
        .max(50)
        .optional(),
      history: z.number().int().min(0).max(24).default(2),
      trees: z.boolean().default(true),
    })
    .default({ mode: 'auto', history: 2, trees: true })
    .describe(
      'Issue-time updating on the latest observation. mode auto (default): kept at the lead times where the held-out block shows a gain beyond twice its standard error (and, where it holds at least 50 past runs, no loss beyond twice its standard error on them); on: every lead time; off: none. leads: horizon of the updater in steps (default: templateLength, at most ten days of steps: 10 for a daily gauge, 240 for an hourly one). leadBands: [first, last] lead bands of the per-band tree candidate. history: earlier errors given to the tree candidates. trees: also fit and score the tree candidates (measured, not served).',
    ),
}).superRefine((body, ctx) => {
  const allowed = body.trainer === 'gradient-boosting' ? boostingParams : body.trainer === 'lstm' ? LSTM_PARAMS : forestParams;
  for (const name of Object.keys(body.params ?? {})) {
    if (!allowed.includes(name)) ctx.addIssue({ code: 'custom', path: ['params', name], message: `not a ${body.trainer} parameter; known: ${allowed.join(', ')}` });
  }
  if (body.trainer === 'lstm' && body.bundle > 1) ctx.addIssue({ code: 'custom', path: ['bundle'], message: 'the lstm trainer keeps one model; bundles are for trees' });
  const u = body.updating;
  const leads = u.leads ?? null;
  u.leadBands?.forEach(([, last], i) => {
    if (leads !== null && last > leads) ctx.addIssue({ code: 'custom', path: ['updating', 'leadBands', i], message: `ends at lead ${last}, past updating.leads (${leads})` });
  });
}).transform((body) => ({
  ...body,
  params: body.params ?? (body.trainer === 'gradient-boosting' ? { nRounds: 400, learningRate: 0.08, maxDepth: 5, patience: 30 } : body.trainer === 'lstm' ? {} : { nTrees: 200, maxDepth: 10 }),
  maxTrainRows: body.maxTrainRows ?? (body.trainer === 'lstm' ? LSTM_DEFAULT_TRAIN_ROWS : 200_000),
}));


const UploadBody = z.strictObject({
  label: z.string().min(1).max(100),
  description: z.string().max(2000).optional(),
  /** The feature spec the model was trained with (see GET /gauges/:id/models/:version for an example). */
  featureSpec: z.unknown(),
  /** The ONNX file, base64-encoded. */
  onnxBase64: z.string().min(1).max(Math.ceil((MAX_UPLOAD_BYTES * 4) / 3) + 4, `the ONNX file may be at most ${MAX_UPLOAD_BYTES / 1024 / 1024} MB`),
  validation: PeriodBody.optional(),
  transform: Transform.default({ kind: 'log' }),
  templateLength: z.number().int().min(1).max(2000).default(240),
  activate: z.boolean().default(false),
  updating: z
    .strictObject({
      mode: z.enum(['auto', 'on', 'off']).default('auto'),
      leads: z.number().int().min(1).max(2000).optional(),
    })
    .default({ mode: 'auto' })
    .describe(
      "Issue-time updating fitted on the uploaded model's pseudo-forecasts, as for a fitted model (closed-form candidates only). mode auto (default): kept at the lead times where the held-out block shows a gain beyond twice its standard error; on: every lead time; off: none. leads: horizon of the updater in steps (default: templateLength, at most ten days of steps).",
    ),
});

const VersionParams = z.object({ id: GaugeParams.shape.id, version: z.string().regex(/^\d{1,18}$/, 'must be a version number') });

export async function modelRoutes(app: FastifyInstance, { services }: { services: Services }) {
  const { db } = services;
  // A version with what its error archives hold: lead-free (continuous simulations) and, where
  // past runs were stored, per-lead.
  const withArchives = async (v: ModelVersion) => ({
    ...v,
    archives: (await versionArchiveSummaries(db, v.id)).map((a) => ({ kind: a.kind, leadMode: a.leadMode, ...a.summary })),
  });

  addRoute(app, services, { response: JobAnswer, status: 202, method: 'POST', url: '/gauges/:id/models/fit', summary: 'Start fitting (and optionally tuning) a residual model; answers at once with a job', tag: 'models', role: 'admin', params: GaugeParams, body: FitBody, bodyOptional: true }, async (req, reply) => {
    const gauge = await requireGauge(db, req.params);
    const body = req.body;
    const job = await enqueueJob(db, 'fit', gauge.id, body, req.principal?.tokenId ?? null);
    reply.code(202).header('location', `/jobs/${job.id}`);
    return job;
  });

  addRoute(app, services, { response: ModelVersionAnswer, status: 201, method: 'POST', url: '/gauges/:id/models/upload', summary: 'Upload an ONNX residual model trained elsewhere, with its feature spec; it is checked on archive rows first', tag: 'models', role: 'admin', params: GaugeParams, body: UploadBody }, async (req, reply) => {
    const gauge = await requireGauge(db, req.params);
    const body = req.body;
    const id = await evaluateUpload(db, gauge, body, req.principal?.tokenId ?? null);
    reply.code(201).header('location', `/gauges/${gauge.id}/models/${id}`);
    return withArchives((await getModelVersion(db, gauge.id, id))!);
  });

  addRoute(app, services, { response: z.object({ gaugeId: z.string(), versions: z.array(ModelVersionAnswer) }), method: 'GET', url: '/gauges/:id/models', summary: "A gauge's residual model versions, newest first", tag: 'models', role: 'read', params: GaugeParams }, async (req) => {
    const gauge = await requireGauge(db, req.params);
    return { gaugeId: gauge.id, versions: await listModelVersions(db, gauge.id) };
  });

  addRoute(app, services, { response: ModelVersionAnswer, method: 'GET', url: '/gauges/:id/models/:version', summary: 'One model version: feature spec, periods, trainer, validation scores, error archives', tag: 'models', role: 'read', params: VersionParams }, async (req) => {
    const { id, version } = req.params;
    const v = await getModelVersion(db, id, version);
    if (!v) throw notFound(`no model version ${version} for gauge ${id}`);
    return withArchives(v);
  });

  addRoute(app, services, { response: ModelVersionAnswer, method: 'POST', url: '/gauges/:id/models/:version/activate', summary: 'Make a version the one that corrects new runs', tag: 'models', role: 'admin', params: VersionParams }, async (req) => {
    const { id, version } = req.params;
    return activateVersion(db, services.pool, id, version, app.log);
  });

  addRoute(app, services, { response: z.object({ rolledBackFrom: z.string().nullable(), active: ModelVersionAnswer }), method: 'POST', url: '/gauges/:id/models/rollback', summary: 'Re-activate the version that was active before the current one', tag: 'models', role: 'admin', params: GaugeParams }, async (req) => {
    const gauge = await requireGauge(db, req.params);
    return rollbackVersion(db, services.pool, gauge.id, app.log);
  });

  const RawArchiveBody = z.strictObject({ transform: Transform.default({ kind: 'log' }), templateLength: z.number().int().min(1).max(2000).default(240) });
  addRoute(app, services, { response: JobAnswer, status: 202, method: 'POST', url: '/gauges/:id/raw-archive', summary: "Start building the raw members' error archive (used in degraded mode)", tag: 'models', role: 'admin', params: GaugeParams, body: RawArchiveBody, bodyOptional: true }, async (req, reply) => {
    const gauge = await requireGauge(db, req.params);
    const body = req.body;
    const job = await enqueueJob(db, 'raw-archive', gauge.id, body, req.principal?.tokenId ?? null);
    reply.code(202).header('location', `/jobs/${job.id}`);
    return job;
  });
}
