// The messages between the main thread and the worker threads, in one place. Two kinds of worker
// start from worker-entry.mjs: correction workers (long-lived, one per pool slot, correction-worker.ts)
// and compute workers (one per task, compute-worker.ts). Both tell a stop on request from a failure
// by the `cancelled` flag, which the main thread turns back into core's CancelledError.
import type { ArchiveSeries, Period, ReforecastSet } from '../core/archive-types.ts';
import type { UpdatingOptions } from '../models/updating-fit.ts';
import type { RunInput } from '../core/features/features.ts';
import type { CorrectionOptions, CorrectionTimings } from '../models/correct-run.ts';
import type { HindcastTaskInput } from '../models/hindcast-compute.ts';
import type { ArchiveOptions } from '../models/residual-evaluation.ts';
import type { LstmFitOptions } from '../models/lstm-fit.ts';
import type { FitOptions } from '../models/residual-fit.ts';
import type { StoredVerificationInput, StoredVerificationResult } from '../core/verification/stored-verification.ts';

/** What a worker thread is started with: the TypeScript module to load (relative to worker-entry.mjs). */
export interface WorkerStart {
  module: './correction-worker.ts' | './compute-worker.ts';
}

// ---- correction workers ----

export type CorrectionRequest =
  | { type: 'load-model'; id: number; versionId: string; parts: Uint8Array[]; spec: unknown }
  | { type: 'load-archive'; id: number; archiveId: string; bytes: Uint8Array }
  | { type: 'correct'; id: number; versionId: string | null; archiveId: string; run: RunInput; options: CorrectionOptions }
  // The verification of stored runs (core verifyStoredRecords): its records arrive in one transferred buffer.
  | { type: 'verify'; id: number; input: StoredVerificationInput };

export interface CorrectionResult {
  corrected: Float64Array | null;
  quantiles: Float64Array;
  exceedance: Float64Array;
  exceedanceAnyTime: Float64Array;
  firstLikelyLead: (number | null)[];
  nDraws: number;
  timings: CorrectionTimings;
}

/** The answer to one request, matched by id; `path` names the run field when inputs did not fit the feature spec. */
export type CorrectionReply = { id: number; ok: true; result?: CorrectionResult | StoredVerificationResult } | { id: number; ok: false; message: string; path: string | null };

// ---- compute workers ----

export type ComputeTask =
  | { kind: 'fit'; series: ArchiveSeries; options: FitOptions }
  | { kind: 'fit-lstm'; series: ArchiveSeries; options: LstmFitOptions }
  | { kind: 'evaluate-upload'; series: ArchiveSeries; onnx: Uint8Array; spec: unknown; validation: Period; archive: ArchiveOptions; reforecasts?: ReforecastSet | null; updating?: UpdatingOptions | null }
  | { kind: 'raw-archive'; series: ArchiveSeries; period: Period; archive: ArchiveOptions }
  | { kind: 'hindcast'; input: HindcastTaskInput };

export interface ComputeStart extends WorkerStart {
  task: ComputeTask;
  /** Element 0 is set to 1 by the main thread to ask the worker to stop at its next check. */
  cancelFlag: Int32Array;
}

export type ComputeMessage =
  | { type: 'progress'; stage: string; percent: number }
  | { type: 'done'; result: unknown }
  /** field: the request option the failure is about (an UpdatingFitError's), when it is one. */
  | { type: 'error'; message: string; cancelled: boolean; field?: string };
