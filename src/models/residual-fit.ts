import type { ErrorTransformSpec } from '../core/stochastic/error-transform.ts';
import { continuousRows, makeFeatureSpec, type FeatureSpec } from '../core/features/features.ts';
import { CancelledError } from '../core/cancelled.ts';
import { leadGrowthScale } from '../core/stochastic/lead-growth.ts';
import { createPrng } from '../core/prng.ts';
import { treeModelToOnnx } from './onnx-export.ts';
import { createResidualSession, predictResiduals } from './onnx-session.ts';
import type { ArchiveSeries, Period, ReforecastSet } from '../core/archive-types.ts';
import { evaluateReforecasts, type ReforecastEvaluation } from './reforecast-evaluation.ts';
import { evaluateResidualModel, forcingPathsSummary, type Evaluation } from './residual-evaluation.ts';
import { predictTrees, trainGradientBoosting, trainRandomForest, type TreeModel } from './trees/index.ts';
import { tune, type SearchParam } from './tuning/index.ts';
import { fitUpdating, type UpdatingFit, type UpdatingOptions } from './updating-fit.ts';

export interface FitOptions {
  calibration: Period;
  /** Split by splitValidation into the early-stopping block and the held-out archive block. */
  validation: Period;
  trainer: 'gradient-boosting' | 'random-forest';
  /** Trainer parameters (fixed, or the starting point when tuning). */
  params: Record<string, number>;
  /** Bayesian-optimisation tuning; null = train once with params. */
  tuning: null | { evaluations: number; initial: number; space: SearchParam[] };
  /** Keep the best few tuned models together as a bundle (1 = the best alone). */
  bundle: number;
  seed: number;
  simLags: number;
  forcings: { name: string; lags: number }[];
  seasonal: boolean;
  transform: ErrorTransformSpec;
  templateLength: number;
  /** Calibration rows are subsampled to at most this many (seeded), to bound fitting time. */
  maxTrainRows: number;
  /** Past runs issued in the archive block; when given, per-lead error archives are built from them too. */
  reforecasts?: ReforecastSet | null;
  /** Issue-time updating (src/models/updating-fit.ts); null or mode 'off' = none. */
  updating?: UpdatingOptions | null;
}

export interface FitProgress {
  stage: string;
  /** 0 … 100 over the whole fit. */
  percent: number;
}

export interface FittedPart {
  model: TreeModel;
  onnx: Uint8Array;
  params: Record<string, number>;
  validationRmse: number;
}

export interface FitResult {
  spec: FeatureSpec;
  parts: FittedPart[];
  trials: { params: Record<string, number>; validationRmse: number }[];
  evaluation: Evaluation;
  /** Per-lead archives of the past runs (null when no reforecasts were given). */
  perLead: ReforecastEvaluation | null;
  /** The issue-time updater, its candidates' scores and archive; null when not asked for. */
  updating: UpdatingFit | null;
  /** Why updating was asked for but not fitted (auto only; `on` fails the fit instead). */
  updatingError: string | null;
  rows: { calibration: number; validation: number };
  onnxCheck: { rows: number; mismatches: number };
  /** The blocks the validation period was split into. */
  blocks: ValidationBlocks;
}

export interface ValidationBlocks {
  /** Early stopping and tuning look here. */
  stopping: Period;
  /** Held out from training, early stopping and tuning: scores and error archives come from here. */
  archive: Period;
}

/** Share of the validation period (its first part, by time) used for early stopping and tuning. */
export const STOPPING_SHARE = 0.4;

/**
 * Splits the validation period into an early-stopping block (the first STOPPING_SHARE of it) and
 * the archive block after it, on a step boundary. Errors from the block the trees were stopped
 * on are slightly optimistic, so the error archives use only data the model never saw.
 */
export function splitValidation(validation: Period, stepMs: number): ValidationBlocks {
  const steps = Math.floor((validation.toMs - validation.fromMs) / stepMs);
  const split = validation.fromMs + Math.max(1, Math.round(steps * STOPPING_SHARE)) * stepMs;
  return { stopping: { fromMs: validation.fromMs, toMs: split }, archive: { fromMs: split, toMs: validation.toMs } };
}

/** Default search space for gradient boosting (ranges are common practice). */
export const defaultBoostingSpace: SearchParam[] = [
  { name: 'learningRate', kind: 'logfloat', low: 0.02, high: 0.3 },
  { name: 'maxDepth', kind: 'int', low: 2, high: 8 },
  { name: 'minChildWeight', kind: 'logfloat', low: 1, high: 200 },
  { name: 'lambda', kind: 'logfloat', low: 0.1, high: 20 },
  { name: 'colSample', kind: 'float', low: 0.5, high: 1 },
];

export const defaultForestSpace: SearchParam[] = [
  { name: 'maxDepth', kind: 'int', low: 4, high: 14 },
  { name: 'minLeafRows', kind: 'int', low: 1, high: 100 },
  { name: 'sampleFraction', kind: 'float', low: 0.3, high: 1 },
];

/**
 * Fits the residual stage from a gauge's continuous member simulations: target = observed −
 * simulated, pooled over members; calibration and validation are contiguous date blocks (nothing
 * shuffled across time); early stopping and tuning look at the first part of the validation
 * period, and the scores and error archives come from the rest, which the model never saw. Exports each
 * kept model to ONNX and checks that onnxruntime reproduces the in-process predictions exactly on
 * every validation row, then scores the correction and builds the error archives: the lead-free
 * one, and the per-lead ones when past runs issued in the validation period are given.
 */
export async function fitResidualModel(
  series: ArchiveSeries,
  options: FitOptions,
  onProgress: (p: FitProgress) => void = () => {},
  shouldStop: () => boolean = () => false,
): Promise<FitResult> {
  const spec = makeFeatureSpec({ stepSeconds: series.stepSeconds, simLags: options.simLags, forcings: options.forcings, seasonal: options.seasonal });
  onProgress({ stage: 'building feature rows', percent: 1 });
  const blocks = splitValidation(options.validation, series.stepSeconds * 1000);
  const [cal, val] = collectRows(series, spec, [options.calibration, blocks.stopping]);
  if (cal.nRows < 50) throw new Error(`the calibration period gives ${cal.nRows} complete rows; at least 50 are needed`);
  if (val.nRows < 20) throw new Error(`the early-stopping block (the first ${STOPPING_SHARE * 100} % of the validation period) gives ${val.nRows} complete rows; at least 20 are needed`);
  const train = subsample(cal, options.maxTrainRows, options.seed);
  const data = { x: train.rows, nRows: train.nRows, nFeatures: train.nFeatures, y: train.target, valid: { x: val.rows, nRows: val.nRows, y: val.target } };

  const trainOnce = (params: Record<string, number>, seed: number, from: number, to: number): TreeModel => {
    const progress = (done: number, total: number) => onProgress({ stage: 'training', percent: from + ((to - from) * done) / total });
    return options.trainer === 'gradient-boosting'
      ? trainGradientBoosting(data, params, seed, progress, shouldStop)
      : trainRandomForest(data, params, seed, progress, shouldStop);
  };
  const score = (model: TreeModel) => rmse(predictTrees(model, val.rows, val.nRows), val.target);

  let kept: { model: TreeModel; params: Record<string, number>; rmse: number }[];
  const trials: FitResult['trials'] = [];
  if (options.tuning) {
    const models = new Map<number, TreeModel>();
    const total = options.tuning.evaluations;
    const result = await tune(
      options.tuning.space,
      (p) => {
        const params = { ...options.params, ...p };
        const i = trials.length;
        const model = trainOnce(params, options.seed + i, 5 + (80 * i) / total, 5 + (80 * (i + 1)) / total);
        const value = score(model);
        models.set(i, model);
        trials.push({ params, validationRmse: value });
        return value;
      },
      {
        evaluations: total,
        initial: Math.min(options.tuning.initial, total),
        seed: options.seed,
        keepBest: options.bundle,
        shouldStop,
        onProgress: (p) => onProgress({ stage: `tuning: trial ${p.done} of ${p.total}`, percent: 5 + (80 * p.done) / p.total }),
      },
    );
    kept = result.trials
      .filter((t) => Number.isFinite(t.value))
      .slice(0, Math.max(1, options.bundle))
      .map((t) => ({ model: models.get(t.index)!, params: { ...options.params, ...t.params }, rmse: t.value }));
  } else {
    const model = trainOnce(options.params, options.seed, 5, 85);
    const value = score(model);
    trials.push({ params: options.params, validationRmse: value });
    kept = [{ model, params: options.params, rmse: value }];
  }
  if (shouldStop()) throw new CancelledError();

  onProgress({ stage: 'exporting to ONNX and checking it', percent: 86 });
  const parts: FittedPart[] = [];
  const sessions = [];
  let mismatches = 0;
  for (const k of kept) {
    const onnx = treeModelToOnnx(k.model, { nFeatures: val.nFeatures, producer: 'streamflow-trust', metadata: { spec: JSON.stringify(spec) } });
    const session = await createResidualSession(onnx);
    const fromRuntime = await predictResiduals(session, val.rows, val.nRows, val.nFeatures);
    const inProcess = predictTrees(k.model, val.rows, val.nRows);
    for (let i = 0; i < val.nRows; i++) if (!Object.is(fromRuntime[i], inProcess[i])) mismatches++;
    sessions.push(session);
    parts.push({ model: k.model, onnx, params: k.params, validationRmse: k.rmse });
  }
  if (mismatches > 0) {
    throw new Error(`onnxruntime disagrees with the in-process trees on ${mismatches} validation rows; the export is refused`);
  }

  onProgress({ stage: 'scoring the validation period and building error archives', percent: 90 });
  const predictors = sessions.map((s) => (rows: Float32Array, n: number, nF: number) => predictResiduals(s, rows, n, nF));
  const evaluation = await evaluateResidualModel(series, spec, blocks.archive, predictors, { transform: options.transform, templateLength: options.templateLength });
  let perLead: ReforecastEvaluation | null = null;
  if (options.reforecasts) {
    onProgress({ stage: 'building the per-lead error archives from the past runs', percent: 95 });
    // The lead-free archive's resolved transform, so both archives' errors share one scale.
    perLead = await evaluateReforecasts(series, options.reforecasts, spec, predictors, { transform: evaluation.correctedArchive.transform });
    // The past runs also say how the errors grow with lead: the lead-free archive learns it too,
    // for runs it serves while the per-lead archive has too few past runs to serve them itself.
    if (perLead.archives) {
      const v = evaluation.scores.errorVariances;
      if (v.memberErrorVariance > 0 && Number.isFinite(v.meanErrorVariance)) {
        evaluation.correctedArchive.leadScale = leadGrowthScale({ ...v, forecastMeanErrorVariance: perLead.archives.correctedSummary.dressing.byLead.map((l) => l.errorVariance) });
        evaluation.scores.leadGrowth = Array.from(evaluation.correctedArchive.leadScale);
      }
    }
    // Better than a scale where they reach: the past runs' own forecast-forcing deviation paths.
    if (perLead.forcingPaths) evaluation.correctedArchive.forcingPaths = perLead.forcingPaths;
  }
  let updating: UpdatingFit | null = null;
  let updatingError: string | null = null;
  // The forecast-forcing error variance per lead the past runs show (τ² of leadGrowthScale), for the
  // updated archive: its pseudo-forecast errors lack it as the lead-free archive's do.
  let forcingErrorVariance: Float64Array | null = null;
  if (perLead?.archives) {
    const v = evaluation.scores.errorVariances;
    if (Number.isFinite(v.meanErrorVariance)) forcingErrorVariance = Float64Array.from(perLead.archives.correctedSummary.dressing.byLead, (l) => Math.max(0, l.errorVariance - v.meanErrorVariance));
  }
  if (options.updating && options.updating.mode !== 'off') {
    onProgress({ stage: 'fitting issue-time updating on pseudo-forecasts', percent: 96 });
    try {
      updating = await fitUpdating(series, spec, options.validation, predictors, evaluation.correctedArchive.transform, options.updating, shouldStop, perLead?.values ?? null, blocks.archive, forcingErrorVariance);
      // The stage's kernel and k as chosen on the lead-free archive's held-out errors.
      if (updating.archive && evaluation.correctedArchive.neighbours) updating.archive.archive.neighbours = evaluation.correctedArchive.neighbours;
      // Pseudo-forecasts lack the forecast-forcing error as the simulations do: the same paths.
      if (updating.archive && perLead?.forcingPaths) {
        updating.archive.archive.forcingPaths = perLead.forcingPaths;
        updating.archive.summary.forcingPaths = forcingPathsSummary(updating.archive.archive);
      }
    } catch (err) {
      if (options.updating.mode === 'on') throw err;
      updatingError = (err as Error).message;
    }
  }
  if (shouldStop()) throw new CancelledError();
  await Promise.all(sessions.map((s) => s.release()));
  onProgress({ stage: 'done', percent: 100 });
  return { spec, parts, trials, evaluation, perLead, updating, updatingError, rows: { calibration: cal.nRows, validation: val.nRows }, onnxCheck: { rows: val.nRows * parts.length, mismatches }, blocks };
}

interface Rows {
  rows: Float32Array;
  target: Float64Array;
  nRows: number;
  nFeatures: number;
}

/** Rows of every member whose time falls in each period, pooled; the rows are built once for all periods. */
function collectRows(series: ArchiveSeries, spec: FeatureSpec, periods: Period[]): Rows[] {
  const parts = series.members.map((m) => continuousRows(spec, { times: series.times, sim: m.values, forcings: series.forcings, obs: series.observed }));
  const nF = parts[0]?.nFeatures ?? 0;
  return periods.map((period) => {
    let n = 0;
    for (const p of parts) for (let r = 0; r < p.nRows; r++) if (inside(series.times[p.index[r]], period)) n++;
    const rows = new Float32Array(n * nF);
    const target = new Float64Array(n);
    let k = 0;
    for (const p of parts) {
      for (let r = 0; r < p.nRows; r++) {
        if (!inside(series.times[p.index[r]], period)) continue;
        rows.set(p.rows.subarray(r * nF, (r + 1) * nF), k * nF);
        target[k++] = p.target[r];
      }
    }
    return { rows, target, nRows: n, nFeatures: nF };
  });
}

const inside = (t: number, p: Period) => t >= p.fromMs && t < p.toMs;

function subsample(r: Rows, max: number, seed: number): Rows {
  if (r.nRows <= max) return r;
  // Partial Fisher–Yates: a seeded sample without replacement, then kept in original order.
  const prng = createPrng(seed, 7);
  const idx = Int32Array.from({ length: r.nRows }, (_, i) => i);
  for (let i = 0; i < max; i++) {
    const j = i + Math.floor(prng.nextFloat() * (r.nRows - i));
    const t = idx[i];
    idx[i] = idx[j];
    idx[j] = t;
  }
  const chosen = idx.subarray(0, max).sort();
  const rows = new Float32Array(max * r.nFeatures);
  const target = new Float64Array(max);
  chosen.forEach((src, k) => {
    rows.set(r.rows.subarray(src * r.nFeatures, (src + 1) * r.nFeatures), k * r.nFeatures);
    target[k] = r.target[src];
  });
  return { rows, target, nRows: max, nFeatures: r.nFeatures };
}

function rmse(pred: ArrayLike<number>, y: ArrayLike<number>): number {
  let s = 0;
  for (let i = 0; i < y.length; i++) s += (pred[i] - y[i]) ** 2;
  return Math.sqrt(s / y.length);
}
