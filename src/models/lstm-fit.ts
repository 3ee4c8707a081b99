// Fits an LSTM residual model from a gauge's continuous member simulations, the sequence
// counterpart of residual-fit.ts: windows [N, window, steps] of the member's simulated flow, the
// forcings and the season; target = observed − simulated, pooled over members; the calibration
// block trains, the validation block is split as for trees (splitValidation in residual-fit.ts):
// its first part stops training early (and scores tuning trials), the rest is scored and builds
// the error archives. The export to the ONNX LSTM
// operator must reproduce the trainer's forward pass on every stopping row (relative 1e-5)
// before anything is handed back.
import type { ErrorTransformSpec } from '../core/stochastic/error-transform.ts';
import { continuousInputs, rowShape } from '../core/features/model-inputs.ts';
import { createPrng } from '../core/prng.ts';
import { checkSequenceSpec, type SequenceSpec, type StepFeature } from '../core/features/sequence-spec.ts';
import { lstmModelToOnnx } from './lstm-onnx-export.ts';
import { predictLstm } from './lstm/forward.ts';
import type { LstmModel } from './lstm/model.ts';
import { trainLstm, type LstmParams } from './lstm/train.ts';
import { predictorFor } from './model-shape.ts';
import { createResidualSession, predictResiduals } from './onnx-session.ts';
import type { ArchiveSeries, Period, ReforecastSet } from '../core/archive-types.ts';
import { CancelledError } from '../core/cancelled.ts';
import type { ReforecastEvaluation } from './reforecast-evaluation.ts';
import { pastRunsAndUpdating } from './past-runs-and-updating.ts';
import type { UpdatingFit, UpdatingOptions } from './updating-fit.ts';
import { evaluateResidualModel, type Evaluation } from './residual-evaluation.ts';
import { splitValidation } from './residual-fit.ts';
import { tune, type SearchParam } from './tuning/index.ts';

export interface LstmFitParams extends LstmParams {
  /** Steps per window (T). */
  window: number;
}

export const defaultLstmFitParams: LstmFitParams = { hidden: 16, learningRate: 0.005, window: 10, epochs: 30, batchSize: 64, patience: 4, clipNorm: 1 };

/** Default search space (ranges are common practice for small daily-step LSTMs). */
export const defaultLstmSpace: SearchParam[] = [
  { name: 'hidden', kind: 'int', low: 4, high: 32 },
  { name: 'window', kind: 'int', low: 5, high: 30 },
  { name: 'learningRate', kind: 'logfloat', low: 0.001, high: 0.03 },
];

export interface LstmFitOptions {
  calibration: Period;
  validation: Period;
  params: Partial<LstmFitParams>;
  tuning: null | { evaluations: number; initial: number; space: SearchParam[] };
  seed: number;
  forcings: string[];
  seasonal: boolean;
  transform: ErrorTransformSpec;
  templateLength: number;
  /** Training windows are sampled (seeded) down to about this many. */
  maxTrainRows: number;
  /** Stopping windows likewise. */
  maxStopRows: number;
  reforecasts?: ReforecastSet | null;
  /** Issue-time updating, fitted on pseudo-forecasts as for the trees; absent or off = none. */
  updating?: UpdatingOptions | null;
}

export interface LstmFitResult {
  spec: SequenceSpec;
  model: LstmModel;
  onnx: Uint8Array;
  params: LstmFitParams;
  validationRmse: number;
  trials: { params: Record<string, number>; validationRmse: number; epochs: number }[];
  evaluation: Evaluation;
  perLead: ReforecastEvaluation | null;
  updating: UpdatingFit | null;
  updatingError: string | null;
  periods: { calibration: Period; stopping: Period; archive: Period };
  rows: { calibration: number; stopping: number };
  onnxCheck: { rows: number; maxRelativeError: number; tolerance: number };
}

const ONNX_TOLERANCE = 1e-5;

/** Mean and standard deviation of transform(values) over the period (finite values only). */
function stats(values: ArrayLike<number>[], times: Float64Array, p: Period, log: boolean): { center: number; scale: number } {
  let n = 0;
  let s = 0;
  let s2 = 0;
  for (const series of values) {
    for (let i = 0; i < times.length; i++) {
      if (times[i] < p.fromMs || times[i] >= p.toMs) continue;
      const v = log ? Math.log1p(series[i]) : series[i];
      if (!Number.isFinite(v)) continue;
      n++;
      s += v;
      s2 += v * v;
    }
  }
  if (n === 0) return { center: 0, scale: 1 };
  const mean = s / n;
  const sd = Math.sqrt(Math.max(0, s2 / n - mean * mean));
  // Rounded so the stored spec reads plainly; exactness does not matter, only that it is stored.
  const round = (v: number) => Number(v.toPrecision(6));
  return { center: round(mean), scale: sd > 1e-9 ? round(sd) : 1 };
}

/** The window spec: sim (log1p), the forcings, the season; scaled by calibration-period statistics. */
export function lstmSpec(series: ArchiveSeries, window: number, forcings: string[], seasonal: boolean, calibration: Period): SequenceSpec {
  const steps: StepFeature[] = [{ name: 'sim', transform: 'log1p', ...stats(series.members.map((m) => m.values), series.times, calibration, true) }];
  for (const name of forcings) steps.push({ name, transform: 'none', ...stats([series.forcings[name]], series.times, calibration, false) });
  if (seasonal) steps.push({ name: 'day_of_year_sin', transform: 'none', center: 0, scale: 1 }, { name: 'day_of_year_cos', transform: 'none', center: 0, scale: 1 });
  return checkSequenceSpec({ version: 1, kind: 'sequence', stepSeconds: series.stepSeconds, window, steps });
}

interface Windows {
  x: Float32Array;
  y: Float64Array;
  nRows: number;
}

/**
 * Windows of every member ending in each period, each kept with probability (seeded) so that
 * about `max[p]` are kept; one member's windows are built at a time to bound memory.
 */
function sampleWindows(series: ArchiveSeries, spec: SequenceSpec, periods: Period[], max: number[], seed: number): Windows[] {
  const width = spec.window * spec.steps.length;
  const prng = createPrng(seed, 21);
  const candidates = periods.map((p) => {
    let n = 0;
    for (let i = 0; i < series.times.length; i++) if (series.times[i] >= p.fromMs && series.times[i] < p.toMs && Number.isFinite(series.observed[i])) n++;
    return n * series.members.length;
  });
  const keepP = candidates.map((c, j) => (c > max[j] ? max[j] / c : 1));
  const out = periods.map((_, j) => ({ x: new Float32Array(Math.ceil(Math.min(candidates[j], max[j] * 1.1 + 100)) * width), y: new Float64Array(Math.ceil(Math.min(candidates[j], max[j] * 1.1 + 100))), nRows: 0 }));
  for (const m of series.members) {
    const w = continuousInputs(spec, { times: series.times, sim: m.values, forcings: series.forcings, obs: series.observed });
    for (let r = 0; r < w.nRows; r++) {
      const t = series.times[w.index[r]];
      for (let j = 0; j < periods.length; j++) {
        if (t < periods[j].fromMs || t >= periods[j].toMs) continue;
        if (keepP[j] < 1 && prng.nextFloat() >= keepP[j]) continue;
        const o = out[j];
        if (o.nRows >= o.y.length) continue; // the rare sample above the headroom
        o.x.set(w.rows.subarray(r * width, (r + 1) * width), o.nRows * width);
        o.y[o.nRows++] = w.target[r];
      }
    }
  }
  return out.map((o) => ({ x: o.x.subarray(0, o.nRows * width), y: o.y.subarray(0, o.nRows), nRows: o.nRows }));
}

export async function fitLstmResidualModel(
  series: ArchiveSeries,
  options: LstmFitOptions,
  onProgress: (p: { stage: string; percent: number }) => void = () => {},
  shouldStop: () => boolean = () => false,
): Promise<LstmFitResult> {
  for (const name of options.forcings) if (!series.forcings[name]) throw new Error(`the archive holds no forcing ${name}`);
  const { stopping, archive } = splitValidation(options.validation, series.stepSeconds * 1000);
  const base: LstmFitParams = { ...defaultLstmFitParams, ...options.params };

  // One training run: windows for its window length, then the trainer; scored on the stopping rows.
  const trainOnce = (params: LstmFitParams, seed: number, from: number, to: number) => {
    const window = Math.round(params.window);
    const spec = lstmSpec(series, window, options.forcings, options.seasonal, options.calibration);
    onProgress({ stage: `building ${window}-step windows`, percent: from });
    const [cal, stop] = sampleWindows(series, spec, [options.calibration, stopping], [options.maxTrainRows, options.maxStopRows], seed);
    if (cal.nRows < 50) throw new Error(`the calibration period gives ${cal.nRows} complete windows; at least 50 are needed`);
    if (stop.nRows < 20) throw new Error(`the stopping part of the validation period gives ${stop.nRows} complete windows; at least 20 are needed`);
    const trained = trainLstm(
      { x: cal.x, nRows: cal.nRows, window, nInputs: spec.steps.length, y: cal.y, valid: { x: stop.x, nRows: stop.nRows, y: stop.y } },
      params,
      seed,
      (done, total) => onProgress({ stage: `training: epoch ${done} of ${total}`, percent: from + ((to - from) * done) / total }),
      shouldStop,
    );
    return { spec, trained, stop, rows: { calibration: cal.nRows, stopping: stop.nRows } };
  };

  let best: ReturnType<typeof trainOnce> & { params: LstmFitParams };
  const trials: LstmFitResult['trials'] = [];
  if (options.tuning) {
    const total = options.tuning.evaluations;
    const runs = new Map<number, ReturnType<typeof trainOnce> & { params: LstmFitParams }>();
    const result = await tune(
      options.tuning.space,
      (p) => {
        const params = { ...base, ...p };
        const i = trials.length;
        const run = trainOnce(params, options.seed + i, 5 + (80 * i) / total, 5 + (80 * (i + 1)) / total);
        if (run.trained.stopReason === 'cancelled') throw new CancelledError();
        const value = Math.min(...run.trained.history);
        // Only the best run so far is kept in memory (its stopping windows are large).
        const bestSoFar = Math.min(Infinity, ...trials.map((t) => t.validationRmse));
        if (value < bestSoFar) {
          runs.clear();
          runs.set(i, { ...run, params });
        }
        trials.push({ params, validationRmse: value, epochs: run.trained.history.length });
        return value;
      },
      { evaluations: total, initial: Math.min(options.tuning.initial, total), seed: options.seed, keepBest: 1, shouldStop },
    );
    if (shouldStop()) throw new CancelledError();
    const top = result.trials.find((t) => Number.isFinite(t.value));
    if (!top || !runs.has(top.index)) throw new Error(`no tuning trial trained: ${result.trials.map((t) => t.error).filter(Boolean)[0] ?? 'unknown'}`);
    best = runs.get(top.index)!;
  } else {
    const run = trainOnce(base, options.seed, 5, 85);
    if (run.trained.stopReason === 'cancelled') throw new CancelledError();
    trials.push({ params: { ...base }, validationRmse: Math.min(...run.trained.history), epochs: run.trained.history.length });
    best = { ...run, params: base };
  }
  if (shouldStop()) throw new CancelledError();

  onProgress({ stage: 'exporting to ONNX and checking it', percent: 86 });
  const { spec, trained, stop } = best;
  const onnx = lstmModelToOnnx(trained.model, { window: spec.window, producer: 'streamflow-trust', metadata: { spec: JSON.stringify(spec) } });
  const session = await createResidualSession(onnx);
  const fromRuntime = await predictResiduals(session, stop.x, stop.nRows, rowShape(spec).reduce((a, b) => a * b, 1), rowShape(spec));
  const inProcess = predictLstm(trained.model, stop.x, stop.nRows, spec.window);
  const maxRelativeError = relativeError(fromRuntime, inProcess);
  if (!(maxRelativeError <= ONNX_TOLERANCE)) {
    await session.release();
    throw new Error(`onnxruntime differs from the trainer's forward pass by ${maxRelativeError.toExponential(2)} (relative; at most ${ONNX_TOLERANCE} allowed); the export is refused`);
  }

  onProgress({ stage: 'scoring the rest of the validation period and building error archives', percent: 90 });
  const predictors = [predictorFor(session, spec)];
  const evaluation = await evaluateResidualModel(series, spec, archive, predictors, { transform: options.transform, templateLength: options.templateLength });
  const { perLead, updating, updatingError } = await pastRunsAndUpdating({
    series,
    spec,
    predictors,
    evaluation,
    reforecasts: options.reforecasts,
    updating: options.updating,
    validation: options.validation,
    archiveBlock: archive,
    onProgress,
    shouldStop,
  });
  await session.release();
  onProgress({ stage: 'done', percent: 100 });
  return {
    spec,
    model: trained.model,
    onnx,
    params: { ...best.params, window: spec.window, hidden: trained.model.hidden },
    validationRmse: Math.min(...trained.history),
    trials,
    evaluation,
    perLead,
    updating,
    updatingError,
    periods: { calibration: options.calibration, stopping, archive },
    rows: best.rows,
    onnxCheck: { rows: stop.nRows, maxRelativeError, tolerance: ONNX_TOLERANCE },
  };
}

/**
 * Largest |a − b| / max(|b|, mean |b|): relative, floored at the outputs' mean magnitude because
 * an output near 0 comes from cancelling terms, where float32 keeps an absolute accuracy.
 */
export function relativeError(a: ArrayLike<number>, b: ArrayLike<number>): number {
  let scale = 0;
  for (let i = 0; i < b.length; i++) scale += Math.abs(b[i]) / b.length;
  let worst = 0;
  for (let i = 0; i < b.length; i++) worst = Math.max(worst, Math.abs(a[i] - b[i]) / Math.max(Math.abs(b[i]), scale, Number.MIN_VALUE));
  return worst;
}
