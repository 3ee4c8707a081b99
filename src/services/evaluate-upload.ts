// Use case: evaluate an uploaded model. An ONNX residual model trained elsewhere is checked (its
// feature spec, its input and output shapes), run over the gauge's validation period in a compute
// worker to score it and build its error archives, and stored as a new version only when all of
// that succeeds; a refusal names the body field and stores nothing.
import { FeatureInputError } from '../core/features/features.ts';
import { checkResidualSpec, specForcings } from '../core/features/model-inputs.ts';
import { modelShapeProblems } from '../models/model-shape.ts';
import type { ErrorTransformSpec } from '../core/stochastic/error-transform.ts';
import { inspectOnnx, OnnxInspectError } from '../models/onnx-inspect.ts';
import { loadArchiveSeries, loadReforecastSet } from '../store/archive-series.ts';
import type { Db } from '../store/db.ts';
import type { Gauge } from '../store/gauges-repo.ts';
import { activateModelVersion, insertModelVersion } from '../store/models-repo.ts';
import { ComputeError, runCompute } from '../workers/run-compute.ts';
import { defaultPeriods, perLeadParts, type FitOutput } from './fit.ts';
import { defaultUpdatingLeads } from '../models/updating-fit.ts';
import { conflict, invalid, type FieldError } from './problem.ts';
import { rfc3339Ms } from '../core/rfc3339.ts';

export const MAX_UPLOAD_BYTES = 20 * 1024 * 1024;

/** An upload request after the wire schema (src/api/models.ts) has applied its defaults. */
export interface UploadRequest {
  label: string;
  description?: string;
  featureSpec: unknown;
  onnxBase64: string;
  validation?: { from: string; to: string };
  transform: ErrorTransformSpec;
  templateLength: number;
  activate: boolean;
  updating: { mode: 'auto' | 'on' | 'off'; leads?: number };
}

/** Checks, evaluates and stores an uploaded model; answers with the new version's id. */
export async function evaluateUpload(db: Db, gauge: Gauge, body: UploadRequest, createdBy: string | null): Promise<string> {
  const onnx = new Uint8Array(Buffer.from(body.onnxBase64, 'base64'));
  if (onnx.length > MAX_UPLOAD_BYTES) throw invalid([{ path: 'body.onnxBase64', message: `the ONNX file is ${onnx.length} bytes; the limit is ${MAX_UPLOAD_BYTES}` }]);
  let spec;
  try {
    spec = checkResidualSpec(body.featureSpec);
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
  // Flat rows [N, nFeatures] or, for a sequence spec, windows [N, window, steps].
  const errors: FieldError[] = modelShapeProblems(spec, summary);
  if (errors.length) throw invalid(errors);

  const series = await loadArchiveSeries(db, gauge.id, gauge.stepSeconds).catch((e: Error) => {
    throw conflict(`the model cannot be checked: ${e.message}`);
  });
  const absent = specForcings(spec).filter((name) => !(name in series.forcings));
  if (absent.length) throw conflict(`the model reads forcing ${absent.join(', ')}, which the gauge's archive does not hold; load it first (POST /gauges/${gauge.id}/forcings)`);
  const validation = body.validation ? { fromMs: rfc3339Ms(body.validation.from), toMs: rfc3339Ms(body.validation.to) } : defaultPeriods(series).validation;
  // Past runs issued in the validation period give the per-lead archives, as for a fitted model.
  const reforecasts = await loadReforecastSet(db, gauge.id, validation);
  let out: Pick<FitOutput, 'scores' | 'correctedArchive' | 'rawArchive' | 'perLead' | 'updating'>;
  const u = body.updating;
  // Closed-form candidates only: tree candidates are measured, not served, and would slow the request.
  const updating = u.mode === 'off' ? null : { mode: u.mode, leads: u.leads ?? defaultUpdatingLeads(series.stepSeconds, body.templateLength), leadBands: null, history: 2, trees: false, seed: 1, maxTrainRows: 50_000 };
  try {
    out = await runCompute<typeof out>({ kind: 'evaluate-upload', series, onnx, spec, validation, archive: { transform: body.transform, templateLength: body.templateLength }, reforecasts, updating }).result;
  } catch (e) {
    if (e instanceof ComputeError && e.field) throw invalid([{ path: `body.${e.field}`, message: e.message }], 'the uploaded model was refused; nothing was stored');
    throw invalid([{ path: 'body.onnxBase64', message: `the model failed on archive rows: ${(e as Error).message}` }], 'the uploaded model was refused; nothing was stored');
  }
  const perLead = perLeadParts(out.perLead);
  const withPerLead = perLead.scores ? { ...out.scores, reforecasts: perLead.scores } : out.scores;
  const scores = { ...withPerLead, updating: out.updating?.scores ?? { status: 'off', reason: u.mode === 'off' ? 'updating: off was asked for' : 'not fitted' } };
  const fitted = out.updating?.model && out.updating.archive ? { model: out.updating.model, archive: out.updating.archive } : null;
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
      createdBy,
      parts: [onnx],
      correctedArchive: out.correctedArchive,
      rawArchive: out.rawArchive,
      perLeadArchives: perLead.archives,
      updating: fitted,
    });
    if (body.activate) await activateModelVersion(tx, gauge.id, versionId);
    return versionId;
  });
  return id;
}
