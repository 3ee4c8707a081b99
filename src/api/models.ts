import type { FastifyInstance } from 'fastify';
import { z } from 'zod';
import { checkFeatureSpec, featureCount, FeatureInputError } from '../core/features.ts';
import { scheduleGaugeStatusRefresh } from '../jobs/drift-refresh.ts';
import { defaultPeriods, perLeadParts, type PerLeadOutput } from '../jobs/fit-job.ts';
import { runCompute } from '../jobs/run-compute.ts';
import { inspectOnnx, OnnxInspectError } from '../models/onnx-inspect.ts';
import { loadArchiveSeries, loadReforecastSet } from '../store/archive-series.ts';
import { enqueueJob } from '../store/jobs-repo.ts';
import {
  activateModelVersion,
  getActiveModelVersion,
  getModelVersion,
  insertModelVersion,
  listModelVersions,
  modelParts,
  previousActivatedVersion,
  versionArchiveSummaries,
  type ModelVersion,
} from '../store/models-repo.ts';
import { GaugeParams, requireGauge } from './archive-common.ts';
import { addRoute, type Services } from './context.ts';
import { conflict, invalid, notFound } from './problem.ts';
import { Rfc3339 } from './schemas.ts';
import { parseWith } from './validate.ts';

const PeriodBody = z.strictObject({ from: Rfc3339, to: Rfc3339 }).refine((p) => Date.parse(p.from) < Date.parse(p.to), { message: 'from must be before to', path: ['to'] });

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
  trainer: z.enum(['gradient-boosting', 'random-forest']).default('gradient-boosting'),
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
  maxTrainRows: z.number().int().min(100).max(2_000_000).default(200_000),
  activate: z.boolean().default(true),
  label: z.string().min(1).max(100).optional(),
}).superRefine((body, ctx) => {
  const allowed = body.trainer === 'gradient-boosting' ? boostingParams : forestParams;
  for (const name of Object.keys(body.params ?? {})) {
    if (!allowed.includes(name)) ctx.addIssue({ code: 'custom', path: ['params', name], message: `not a ${body.trainer} parameter; known: ${allowed.join(', ')}` });
  }
}).transform((body) => ({
  ...body,
  params: body.params ?? (body.trainer === 'gradient-boosting' ? { nRounds: 400, learningRate: 0.08, maxDepth: 5, patience: 30 } : { nTrees: 200, maxDepth: 10 }),
}));

const MAX_UPLOAD_BYTES = 20 * 1024 * 1024;

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
});

const VersionParams = z.object({ id: GaugeParams.shape.id, version: z.string().regex(/^\d{1,18}$/, 'must be a version number') });

export async function modelRoutes(app: FastifyInstance, { services }: { services: Services }) {
  const { db } = services;
  // Load a newly active version into every correction worker now, not on the next run.
  const warm = (v: { id: string; gaugeId: string; featureSpec: unknown }) => {
    // The drift watch compares against the active version: refresh the gauge's status now.
    scheduleGaugeStatusRefresh(db, v.gaugeId, app.log);
    services.pool.warm({ versionId: v.id, load: async () => ({ parts: await modelParts(db, v.id), spec: v.featureSpec }) }).catch((err: Error) => {
      app.log.warn({ version: v.id, err: err.message }, 'could not warm the model in the correction workers');
    });
  };

  // A version with what its error archives hold: lead-free (continuous simulations) and, where
  // past runs were stored, per-lead.
  const withArchives = async (v: ModelVersion) => ({
    ...v,
    archives: (await versionArchiveSummaries(db, v.id)).map((a) => ({ kind: a.kind, leadMode: a.leadMode, ...a.summary })),
  });

  addRoute(app, services, { method: 'POST', url: '/gauges/:id/models/fit', summary: 'Start fitting (and optionally tuning) a residual model; answers at once with a job', tag: 'models', role: 'admin', params: GaugeParams, body: FitBody }, async (req, reply) => {
    const gauge = await requireGauge(db, req.params);
    const body = parseWith(FitBody, req.body ?? {}, 'body');
    const job = await enqueueJob(db, 'fit', gauge.id, body, req.principal?.tokenId ?? null);
    reply.code(202).header('location', `/jobs/${job.id}`);
    return job;
  });

  addRoute(app, services, { method: 'POST', url: '/gauges/:id/models/upload', summary: 'Upload an ONNX residual model trained elsewhere, with its feature spec; it is checked on archive rows first', tag: 'models', role: 'admin', params: GaugeParams, body: UploadBody }, async (req, reply) => {
    const gauge = await requireGauge(db, req.params);
    const body = parseWith(UploadBody, req.body, 'body');
    const onnx = new Uint8Array(Buffer.from(body.onnxBase64, 'base64'));
    if (onnx.length > MAX_UPLOAD_BYTES) throw invalid([{ path: 'body.onnxBase64', message: `the ONNX file is ${onnx.length} bytes; the limit is ${MAX_UPLOAD_BYTES}` }]);
    let spec;
    try {
      spec = checkFeatureSpec(body.featureSpec);
    } catch (e) {
      if (e instanceof FeatureInputError) throw invalid([{ path: `body.featureSpec${e.path.replace(/^spec/, '')}`, message: e.message }]);
      throw e;
    }
    if (spec.stepSeconds !== gauge.stepSeconds) throw invalid([{ path: 'body.featureSpec.stepSeconds', message: `is ${spec.stepSeconds}; the gauge's step is ${gauge.stepSeconds} s` }]);
    let summary;
    try {
      summary = inspectOnnx(onnx);
    } catch (e) {
      if (e instanceof OnnxInspectError) throw invalid([{ path: 'body.onnxBase64', message: `not a readable ONNX model: ${e.message}` }]);
      throw e;
    }
    const nF = featureCount(spec);
    const errors = [];
    const input = summary.inputs[0];
    if (summary.inputs.length !== 1) errors.push({ path: 'body.onnxBase64', message: `the model must take exactly one input, it takes ${summary.inputs.length}` });
    else if (input.elemType !== 'float' || input.dims.length !== 2 || (typeof input.dims[1] === 'number' && input.dims[1] !== nF)) {
      errors.push({ path: 'body.onnxBase64', message: `input ${input.name} must be float [N, ${nF}] (the feature spec's ${nF} features); it is ${input.elemType} [${input.dims.join(', ')}]` });
    }
    const output = summary.outputs[0];
    if (summary.outputs.length < 1) errors.push({ path: 'body.onnxBase64', message: 'the model has no output' });
    else if (output.elemType !== 'float' || output.dims.length > 2 || (output.dims.length === 2 && typeof output.dims[1] === 'number' && output.dims[1] !== 1)) {
      errors.push({ path: 'body.onnxBase64', message: `output ${output.name} must be float [N, 1] or [N] (one residual per row); it is ${output.elemType} [${output.dims.join(', ')}]` });
    }
    if (errors.length) throw invalid(errors);

    const series = await loadArchiveSeries(db, gauge.id, gauge.stepSeconds).catch((e: Error) => {
      throw conflict(`the model cannot be checked: ${e.message}`);
    });
    const validation = body.validation ? { fromMs: Date.parse(body.validation.from), toMs: Date.parse(body.validation.to) } : defaultPeriods(series).validation;
    // Past runs issued in the validation period give the per-lead archives, as for a fitted model.
    const reforecasts = await loadReforecastSet(db, gauge.id, validation);
    let out: {
      scores: Record<string, unknown>;
      correctedArchive: { bytes: Uint8Array; summary: Record<string, unknown> };
      rawArchive: { bytes: Uint8Array; summary: Record<string, unknown> };
      perLead: PerLeadOutput | null;
    };
    try {
      out = await runCompute<typeof out>({ kind: 'evaluate-upload', series, onnx, spec, validation, archive: { transform: body.transform, templateLength: body.templateLength }, reforecasts }).result;
    } catch (e) {
      throw invalid([{ path: 'body.onnxBase64', message: `the model failed on archive rows: ${(e as Error).message}` }], 'the uploaded model was refused; nothing was stored');
    }
    const perLead = perLeadParts(out.perLead);
    const scores = perLead.scores ? { ...out.scores, reforecasts: perLead.scores } : out.scores;
    const id = await db.transaction(async (tx) => {
      const versionId = await insertModelVersion(tx, {
        gaugeId: gauge.id,
        origin: 'uploaded',
        label: body.label,
        featureSpec: spec,
        trainer: { kind: 'uploaded', description: body.description ?? null, producer: summary.producer, opsets: summary.opsets, bytes: onnx.length },
        // Trained elsewhere: whether the validation period was seen in training is not known here.
        periods: { validation: out.scores.period, archive: out.scores.period, archiveSource: 'unknown (trained elsewhere)' },
        scores,
        createdBy: req.principal?.tokenId ?? null,
        parts: [onnx],
        correctedArchive: out.correctedArchive,
        rawArchive: out.rawArchive,
        perLeadArchives: perLead.archives,
      });
      if (body.activate) await activateModelVersion(tx, gauge.id, versionId);
      return versionId;
    });
    reply.code(201).header('location', `/gauges/${gauge.id}/models/${id}`);
    return withArchives((await getModelVersion(db, gauge.id, id))!);
  });

  addRoute(app, services, { method: 'GET', url: '/gauges/:id/models', summary: "A gauge's residual model versions, newest first", tag: 'models', role: 'read', params: GaugeParams }, async (req) => {
    const gauge = await requireGauge(db, req.params);
    return { gaugeId: gauge.id, versions: await listModelVersions(db, gauge.id) };
  });

  addRoute(app, services, { method: 'GET', url: '/gauges/:id/models/:version', summary: 'One model version: feature spec, periods, trainer, validation scores, error archives', tag: 'models', role: 'read', params: VersionParams }, async (req) => {
    const { id, version } = parseWith(VersionParams, req.params, 'params');
    const v = await getModelVersion(db, id, version);
    if (!v) throw notFound(`no model version ${version} for gauge ${id}`);
    return withArchives(v);
  });

  addRoute(app, services, { method: 'POST', url: '/gauges/:id/models/:version/activate', summary: 'Make a version the one that corrects new runs', tag: 'models', role: 'admin', params: VersionParams }, async (req) => {
    const { id, version } = parseWith(VersionParams, req.params, 'params');
    return db.transaction(async (tx) => {
      if (!(await getModelVersion(tx, id, version))) throw notFound(`no model version ${version} for gauge ${id}`);
      await activateModelVersion(tx, id, version);
      return getModelVersion(tx, id, version);
    }).then((v) => {
      warm(v!);
      return v;
    });
  });

  addRoute(app, services, { method: 'POST', url: '/gauges/:id/models/rollback', summary: 'Re-activate the version that was active before the current one', tag: 'models', role: 'admin', params: GaugeParams }, async (req) => {
    const gauge = await requireGauge(db, req.params);
    return db.transaction(async (tx) => {
      const current = await getActiveModelVersion(tx, gauge.id);
      const previous = await previousActivatedVersion(tx, gauge.id);
      if (!previous) throw conflict(`gauge ${gauge.id} has no earlier active version to roll back to`);
      await activateModelVersion(tx, gauge.id, previous);
      return { rolledBackFrom: current?.id ?? null, active: await getModelVersion(tx, gauge.id, previous) };
    }).then((r) => {
      warm(r.active!);
      return r;
    });
  });

  const RawArchiveBody = z.strictObject({ transform: Transform.default({ kind: 'log' }), templateLength: z.number().int().min(1).max(2000).default(240) });
  addRoute(app, services, { method: 'POST', url: '/gauges/:id/raw-archive', summary: "Start building the raw members' error archive (used in degraded mode)", tag: 'models', role: 'admin', params: GaugeParams, body: RawArchiveBody }, async (req, reply) => {
    const gauge = await requireGauge(db, req.params);
    const body = parseWith(RawArchiveBody, req.body ?? {}, 'body');
    const job = await enqueueJob(db, 'raw-archive', gauge.id, body, req.principal?.tokenId ?? null);
    reply.code(202).header('location', `/jobs/${job.id}`);
    return job;
  });
}
