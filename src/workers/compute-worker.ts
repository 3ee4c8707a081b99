// Runs CPU-heavy work (fitting, evaluating uploaded models, building archives) off the event loop.
// Receives one task in workerData, posts {type:'progress'} messages and one {type:'done'|'error'}.
import { parentPort, workerData } from 'node:worker_threads';
import { archiveToBytes } from '../core/stochastic/archive-codec.ts';
import { checkResidualSpec } from '../core/features/model-inputs.ts';
import { CancelledError } from '../core/cancelled.ts';
import { computeHindcast } from '../models/hindcast-compute.ts';
import { fitLstmResidualModel } from '../models/lstm-fit.ts';
import { predictorFor } from '../models/model-shape.ts';
import { createResidualSession } from '../models/onnx-session.ts';
import type { ReforecastEvaluation } from '../models/reforecast-evaluation.ts';
import { pastRunsAndUpdating, UpdatingFitError } from '../models/past-runs-and-updating.ts';
import { archiveSummary, evaluateResidualModel, rawArchiveFromSeries } from '../models/residual-evaluation.ts';
import { fitResidualModel } from '../models/residual-fit.ts';
import type { ComputeMessage, ComputeStart } from './protocol.ts';
import type { UpdatingFit } from '../models/updating-fit.ts';

const { task, cancelFlag } = workerData as ComputeStart;
const shouldStop = () => Atomics.load(cancelFlag, 0) === 1;
const post = (m: ComputeMessage) => parentPort!.postMessage(m);
const progress = (p: { stage: string; percent: number }) => post({ type: 'progress', ...p });

/** The per-lead archives as stored (bytes + summary), or why there are none; null without past runs. */
function perLeadResult(e: ReforecastEvaluation | null) {
  if (!e) return null;
  const a = e.archives;
  return {
    corrected: a ? { bytes: archiveToBytes(a.corrected), summary: { ...a.correctedSummary } as Record<string, unknown> } : null,
    raw: a ? { bytes: archiveToBytes(a.raw), summary: { ...a.rawSummary } as Record<string, unknown> } : null,
    reason: e.reason,
    scores: e.scores,
  };
}

/**
 * The updater as stored: the model, its scores (what GET of the version shows), its archive's
 * bytes and the archive cases' issue-time errors (UpdatingFit.archive.issueError).
 */
function updatingResult(u: UpdatingFit | null, error: string | null) {
  if (!u) return error ? { model: null, archive: null, scores: { status: 'off', reason: error } } : null;
  const { archive, model, ...scores } = u;
  return {
    model,
    // issueError: float64 bytes aligned with the archive's cases (stored beside it for the stage).
    archive: archive ? { bytes: archiveToBytes(archive.archive), summary: archive.summary, issueError: new Uint8Array(archive.issueError.buffer, archive.issueError.byteOffset, archive.issueError.byteLength) } : null,
    scores: { status: model ? 'on' : 'off', ...scores, method: model?.method ?? null, phi: model?.phi ?? null, ar1: model?.ar1 ?? null },
  };
}

async function run(): Promise<unknown> {
  switch (task.kind) {
    case 'fit': {
      const r = await fitResidualModel(task.series, task.options, progress, shouldStop);
      return {
        spec: r.spec,
        parts: r.parts.map((p) => ({ onnx: p.onnx, params: p.params, validationRmse: p.validationRmse, trees: p.model.trees.length, info: p.model.info })),
        trials: r.trials,
        scores: r.evaluation.scores,
        rows: r.rows,
        onnxCheck: r.onnxCheck,
        correctedArchive: { bytes: archiveToBytes(r.evaluation.correctedArchive), summary: archiveSummary(r.evaluation.correctedArchive) },
        rawArchive: { bytes: archiveToBytes(r.evaluation.rawArchive), summary: archiveSummary(r.evaluation.rawArchive) },
        perLead: perLeadResult(r.perLead),
        updating: updatingResult(r.updating, r.updatingError),
      };
    }
    case 'fit-lstm': {
      const r = await fitLstmResidualModel(task.series, task.options, progress, shouldStop);
      return {
        spec: r.spec,
        parts: [{ onnx: r.onnx, params: r.params, validationRmse: r.validationRmse, info: r.model.info }],
        trials: r.trials,
        scores: r.evaluation.scores,
        rows: r.rows,
        onnxCheck: r.onnxCheck,
        correctedArchive: { bytes: archiveToBytes(r.evaluation.correctedArchive), summary: archiveSummary(r.evaluation.correctedArchive) },
        rawArchive: { bytes: archiveToBytes(r.evaluation.rawArchive), summary: archiveSummary(r.evaluation.rawArchive) },
        perLead: perLeadResult(r.perLead),
        updating: updatingResult(r.updating, r.updatingError),
      };
    }
    case 'evaluate-upload': {
      const spec = checkResidualSpec(task.spec);
      progress({ stage: 'loading the model', percent: 10 });
      const session = await createResidualSession(task.onnx);
      progress({ stage: 'running it on the validation period', percent: 30 });
      const predictors = [predictorFor(session, spec)];
      const evaluation = await evaluateResidualModel(task.series, spec, task.validation, predictors, task.archive);
      const check = evaluation.correctedArchive.error.every(Number.isFinite);
      if (!check) throw new Error('the model produced non-finite residuals on archive rows');
      // Trained elsewhere: the whole validation period is its archive block.
      const after = await pastRunsAndUpdating({
        series: task.series,
        spec,
        predictors,
        evaluation,
        reforecasts: task.reforecasts,
        updating: task.updating,
        validation: task.validation,
        archiveBlock: task.validation,
        onProgress: progress,
        shouldStop,
      });
      await session.release();
      return {
        spec,
        scores: evaluation.scores,
        correctedArchive: { bytes: archiveToBytes(evaluation.correctedArchive), summary: archiveSummary(evaluation.correctedArchive) },
        rawArchive: { bytes: archiveToBytes(evaluation.rawArchive), summary: archiveSummary(evaluation.rawArchive) },
        perLead: perLeadResult(after.perLead),
        updating: updatingResult(after.updating, after.updatingError),
      };
    }
    case 'raw-archive': {
      const a = rawArchiveFromSeries(task.series, task.period, task.archive);
      return { bytes: archiveToBytes(a), summary: archiveSummary(a) };
    }
    case 'hindcast':
      return computeHindcast(task.input, progress, shouldStop);
  }
}

run().then(
  (result) => post({ type: 'done', result }),
  (err: Error) => post({ type: 'error', message: err.message, cancelled: err instanceof CancelledError, ...(err instanceof UpdatingFitError ? { field: err.field } : {}) }),
);
