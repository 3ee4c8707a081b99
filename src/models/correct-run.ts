import type { InferenceSession } from 'onnxruntime-node';
import { correctedMember } from '../core/correction/corrected-member.ts';
import { dayOfYearUtc } from '../core/day-of-year.ts';
import type { ErrorArchive } from '../core/stochastic/error-archive.ts';
import type { RunInput } from '../core/features/features.ts';
import { rowShape, servingInputs, type ResidualSpec } from '../core/features/model-inputs.ts';
import { emptyStageTimings, runStochasticStage, type StageTimings, type StochasticResult, type StochasticWorkspace } from '../core/stochastic/stochastic-stage.ts';
import { predictResiduals } from './onnx-session.ts';
import { applyUpdating, type UpdatingModel } from '../core/correction/updating.ts';
import { observationTimeInputs } from '../core/correction/updating-rows.ts';

export interface CorrectionOptions {
  stepSeconds: number;
  seed: number;
  nDraws: number;
  probs: number[];
  thresholds: number[];
  seasonalWindowDays: number | null;
  /** Issue-time updating on an observation ageSteps before issue; absent = not updated. */
  updating?: { model: UpdatingModel; observation: number; ageSteps: number } | null;
}

export interface CorrectionOutput {
  /** Corrected members (mean over a bundle's models), [member·nLeads + lead]; null when degraded. */
  corrected: Float64Array | null;
  stage: StochasticResult;
  /**
   * With updating: each (model, member)'s issue-time error ε0 = T(observed) − T(corrected) in the
   * updater's transform, [model·nMembers + member] (for a stage that conditions on it); else null.
   */
  issueError: Float64Array | null;
  timings: CorrectionTimings;
}

/** Milliseconds per part of a correction: feature rows, inference, and the stochastic stage with its parts. */
export interface CorrectionTimings {
  featuresMs: number;
  inferenceMs: number;
  stochasticMs: number;
  stage: StageTimings;
}

/** The run's raw values at the lead times: the last nLeads of each member's series. */
export function rawAtLeads(run: RunInput): Float64Array {
  const out = new Float64Array(run.members.length * run.nLeads);
  run.members.forEach((m, i) => {
    for (let k = 0; k < run.nLeads; k++) out[i * run.nLeads + k] = Number(m[m.length - run.nLeads + k]);
  });
  return out;
}

/**
 * The correction pipeline for one run: feature rows for all members × lead times, one batched
 * inference per bundled residual model, each model's corrected member (src/core/correction/corrected-member.ts;
 * the reported ensemble is their mean over models), then the stochastic error stage over every (model, member) with the corrected-error archive. With no sessions the
 * stage runs on the raw members (degraded mode; the archive must then be the raw-error one).
 */
export async function correctRun(
  run: RunInput,
  spec: ResidualSpec | null,
  sessions: InferenceSession[],
  archive: ErrorArchive,
  options: CorrectionOptions,
  workspace: StochasticWorkspace,
): Promise<CorrectionOutput> {
  const nM = run.members.length;
  const H = run.nLeads;
  const raw = rawAtLeads(run);
  let t = performance.now();
  let featuresMs = 0;
  let inferenceMs = 0;
  let stageInput = raw;
  let corrected: Float64Array | null = null;
  let issueError: Float64Array | null = null;
  if (sessions.length) {
    const rows = servingInputs(spec!, run);
    featuresMs = performance.now() - t;
    t = performance.now();
    stageInput = new Float64Array(sessions.length * nM * H);
    corrected = new Float64Array(nM * H);
    for (let s = 0; s < sessions.length; s++) {
      const residual = await predictResiduals(sessions[s], rows.rows, rows.nRows, rows.nFeatures, rowShape(spec!));
      for (let i = 0; i < nM * H; i++) {
        const v = correctedMember(raw[i], residual[i]);
        if (!Number.isFinite(v)) throw new Error(`the residual model returned a non-finite value for member ${Math.floor(i / H)} at lead ${(i % H) + 1}`);
        stageInput[s * nM * H + i] = v;
        corrected[i] += v / sessions.length;
      }
    }
    if (options.updating) {
      // Each (model, member)'s corrected value at the observation's time gives its issue-time error.
      const u = options.updating;
      const at = observationTimeInputs(spec!, run, u.ageSteps);
      corrected.fill(0);
      issueError = new Float64Array(sessions.length * nM);
      for (let s = 0; s < sessions.length; s++) {
        const residual = await predictResiduals(sessions[s], at.rows, at.nRows, at.nFeatures, rowShape(spec!));
        const atObs = Float64Array.from({ length: nM }, (_, m) => correctedMember(at.simAt[m], residual[m]));
        const block = stageInput.subarray(s * nM * H, (s + 1) * nM * H);
        issueError.set(applyUpdating(u.model, block, atObs, u.observation, u.ageSteps, H), s * nM);
        for (let i = 0; i < nM * H; i++) corrected[i] += block[i] / sessions.length;
      }
    }
    inferenceMs = performance.now() - t;
  }
  t = performance.now();
  const stepMs = options.stepSeconds * 1000;
  const doy = Int32Array.from({ length: H }, (_, k) => dayOfYearUtc(run.issueTime + (k + 1) * stepMs));
  const stageTimings = emptyStageTimings();
  const stage = runStochasticStage(
    archive,
    // With updating, each member draws from the archive's stratum of its own issue-time error.
    // An observation j steps old makes lead h lead h + j from it, in the updater and in the archive.
    { members: stageInput, nModels: sessions.length || 1, nMembers: nM, nLeads: H, dayOfYear: doy, ...(issueError ? { issueError, leadOffset: options.updating!.ageSteps } : {}) },
    { seed: options.seed, nDraws: options.nDraws, probs: options.probs, thresholds: options.thresholds, seasonalWindowDays: options.seasonalWindowDays, timings: stageTimings },
    workspace,
  );
  return { corrected, stage, issueError, timings: { featuresMs, inferenceMs, stochasticMs: performance.now() - t, stage: stageTimings } };
}
