// The LSTM fit as a background job: the options built from the job's parameters (job side), the
// fit itself and the stored forms of its results (compute-worker side), and the trainer record
// kept with the model version.
import { archiveToBytes } from '../core/archive-codec.ts';
import type { ErrorTransformSpec } from '../core/error-transform.ts';
import { defaultLstmSpace, fitLstmResidualModel, type LstmFitOptions } from '../models/lstm-fit.ts';
import type { ReforecastSet } from '../models/reforecast-evaluation.ts';
import { archiveSummary, type ArchiveSeries, type Period } from '../models/residual-evaluation.ts';

/** Parameters of the in-house LSTM a fit request may set; unset ones take defaultLstmFitParams (src/models/lstm-fit.ts). */
export const LSTM_PARAMS = ['hidden', 'window', 'learningRate', 'epochs', 'batchSize', 'patience'];
/** Training windows are sampled down to this many unless the request says otherwise (bounds the fit to minutes). */
export const LSTM_DEFAULT_TRAIN_ROWS = 20_000;
const MAX_STOP_ROWS = 10_000;

export function lstmFitOptions(
  p: { params: Record<string, number>; tuning: null | { evaluations: number; initial: number }; seed: number; seasonal: boolean; transform: ErrorTransformSpec; templateLength: number; maxTrainRows: number },
  periods: { calibration: Period; validation: Period },
  forcings: string[],
  reforecasts: ReforecastSet | null,
): LstmFitOptions {
  return {
    ...periods,
    params: p.params,
    tuning: p.tuning ? { ...p.tuning, space: defaultLstmSpace } : null,
    seed: p.seed,
    forcings,
    seasonal: p.seasonal,
    transform: p.transform,
    templateLength: p.templateLength,
    maxTrainRows: p.maxTrainRows,
    maxStopRows: MAX_STOP_ROWS,
    reforecasts,
  };
}

/** Runs in the compute worker: the fit, then everything the job stores, as plain data. */
export async function runLstmFit(series: ArchiveSeries, options: LstmFitOptions, progress: (p: { stage: string; percent: number }) => void, shouldStop: () => boolean) {
  const r = await fitLstmResidualModel(series, options, progress, shouldStop);
  const a = r.perLead?.archives;
  return {
    spec: r.spec,
    parts: [{ onnx: r.onnx, params: r.params, validationRmse: r.validationRmse, info: r.model.info }],
    trials: r.trials,
    scores: { ...r.evaluation.scores } as Record<string, unknown>,
    rows: r.rows,
    onnxCheck: r.onnxCheck,
    correctedArchive: { bytes: archiveToBytes(r.evaluation.correctedArchive), summary: archiveSummary(r.evaluation.correctedArchive) },
    rawArchive: { bytes: archiveToBytes(r.evaluation.rawArchive), summary: archiveSummary(r.evaluation.rawArchive) },
    perLead: r.perLead
      ? {
          corrected: a ? { bytes: archiveToBytes(a.corrected), summary: { ...a.correctedSummary } as Record<string, unknown> } : null,
          raw: a ? { bytes: archiveToBytes(a.raw), summary: { ...a.rawSummary } as Record<string, unknown> } : null,
          reason: r.perLead.reason,
          scores: r.perLead.scores,
        }
      : null,
  };
}

export type LstmFitOutput = Awaited<ReturnType<typeof runLstmFit>>;

/** What the model version records about the LSTM fit. */
export function lstmTrainerRecord(out: LstmFitOutput, seed: number): Record<string, unknown> {
  const part = out.parts[0];
  return {
    kind: 'lstm',
    params: part.params,
    model: part.info,
    trials: out.trials,
    seed,
    rows: out.rows,
    onnxCheck: out.onnxCheck,
  };
}
