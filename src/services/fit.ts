// Use case: fit a residual model (and its error archives) from a gauge's archive, store it as a new
// version and optionally activate it; and build the raw members' error archive alone. The trees,
// tuning and ONNX export run in a compute worker (src/models/residual-fit.ts); so does the in-house
// LSTM (src/models/lstm-fit.ts, trainer 'lstm').
import { z } from 'zod';
import { archiveToBytes } from '../core/stochastic/archive-codec.ts';
import type { ArchiveSeries, Period } from '../core/archive-types.ts';
import type { ErrorTransform } from '../core/stochastic/error-transform.ts';
import { defaultLstmSpace, type LstmFitOptions } from '../models/lstm-fit.ts';
import { rawArchiveFromReforecasts, type ReforecastScores } from '../models/reforecast-evaluation.ts';
import { defaultBoostingSpace, defaultForestSpace, splitValidation, type FitOptions } from '../models/residual-fit.ts';
import { defaultUpdatingLeads } from '../models/updating-fit.ts';
import { loadArchiveSeries, loadReforecastSet } from '../store/archive-series.ts';
import type { Db } from '../store/db.ts';
import { getGauge } from '../store/gauges-repo.ts';
import { activateModelVersion, insertArchive, insertModelVersion } from '../store/models-repo.ts';
import { runCompute } from '../workers/run-compute.ts';
import type { JobHold, JobProgress } from './job-progress.ts';
import { rfc3339Ms } from '../core/rfc3339.ts';

const TransformSpec = z.discriminatedUnion('kind', [
  z.object({ kind: z.literal('none') }),
  z.object({ kind: z.literal('log'), offset: z.number().positive().optional() }),
  z.object({ kind: z.literal('boxcox'), lambda: z.number(), offset: z.number().positive().optional() }),
]);
const PeriodText = z.object({ from: z.string(), to: z.string() });

/** Parameters of a fit job, as stored with the job (the API's FitBody after its defaults). */
export const FitJobParams = z.object({
  trainer: z.enum(['gradient-boosting', 'random-forest', 'lstm']),
  params: z.record(z.string(), z.number()),
  tuning: z.object({ evaluations: z.number().int(), initial: z.number().int() }).nullable(),
  bundle: z.number().int(),
  seed: z.number().int(),
  calibration: PeriodText.optional(),
  validation: PeriodText.optional(),
  simLags: z.number().int(),
  forcingLags: z.number().int(),
  forcings: z.array(z.string()).optional(),
  seasonal: z.boolean(),
  transform: TransformSpec,
  templateLength: z.number().int(),
  maxTrainRows: z.number().int(),
  activate: z.boolean(),
  label: z.string().optional(),
  /** Issue-time updating; absent on jobs queued before it existed (= off). */
  updating: z
    .object({
      mode: z.enum(['auto', 'on', 'off']),
      leads: z.number().int().optional(),
      leadBands: z.array(z.tuple([z.number().int(), z.number().int()])).optional(),
      history: z.number().int(),
      trees: z.boolean(),
    })
    .optional(),
});
export type FitJobParams = z.output<typeof FitJobParams>;

/** Parameters of the in-house LSTM a fit request may set; unset ones take defaultLstmFitParams (src/models/lstm-fit.ts). */
export const LSTM_PARAMS = ['hidden', 'window', 'learningRate', 'epochs', 'batchSize', 'patience'];
/** LSTM training windows are sampled down to this many unless the request says otherwise: an epoch costs far more per row than a tree. */
export const LSTM_DEFAULT_TRAIN_ROWS = 20_000;
const LSTM_STOP_ROWS = 10_000;

/** Parameters of a raw-archive job. */
export const RawArchiveJobParams = z.object({ templateLength: z.number().int(), transform: TransformSpec });
export type RawArchiveJobParams = z.output<typeof RawArchiveJobParams>;

/**
 * Default periods: of the steps with an observation, the first 60 % calibrate and the rest
 * validate (contiguous blocks by date); the fit splits validation again into an early-stopping
 * block and a held-out archive block (splitValidation).
 */
export function defaultPeriods(series: ArchiveSeries): { calibration: Period; validation: Period } {
  const observedTimes: number[] = [];
  for (let i = 0; i < series.times.length; i++) if (Number.isFinite(series.observed[i])) observedTimes.push(series.times[i]);
  if (observedTimes.length < 100) throw new Error(`only ${observedTimes.length} steps have both simulations and observations; at least 100 are needed`);
  const split = observedTimes[Math.floor(observedTimes.length * 0.6)];
  const end = observedTimes[observedTimes.length - 1] + series.stepSeconds * 1000;
  return { calibration: { fromMs: observedTimes[0], toMs: split }, validation: { fromMs: split, toMs: end } };
}

const period = (p: { from: string; to: string }): Period => ({ fromMs: rfc3339Ms(p.from), toMs: rfc3339Ms(p.to) });
const iso = (ms: number) => new Date(ms).toISOString().replace('.000Z', 'Z');

interface FitOutput {
  spec: unknown;
  /** trees is the tree count (absent for the LSTM). */
  parts: { onnx: Uint8Array; params: Record<string, number>; validationRmse: number; trees?: number; info: unknown }[];
  trials: unknown[];
  scores: Record<string, unknown>;
  rows: unknown;
  onnxCheck: unknown;
  correctedArchive: { bytes: Uint8Array; summary: Record<string, unknown> };
  rawArchive: { bytes: Uint8Array; summary: Record<string, unknown> };
  perLead: PerLeadOutput | null;
  updating: { model: unknown; archive: (StoredForm & { issueError: Uint8Array }) | null; scores: Record<string, unknown> } | null;
}

type StoredForm = { bytes: Uint8Array; summary: Record<string, unknown> };

/** The worker's per-lead result ('fit' and 'evaluate-upload'): archives, or why there are none. */
export interface PerLeadOutput {
  corrected: StoredForm | null;
  raw: StoredForm | null;
  reason: string | null;
  scores: ReforecastScores | null;
}

/** The version's per-lead archives to store, and what its scores say about the past runs. */
export function perLeadParts(p: PerLeadOutput | null): {
  archives: { corrected: StoredForm; raw: StoredForm | null } | null;
  scores: Record<string, unknown> | null;
} {
  if (!p) return { archives: null, scores: null };
  const archives = p.corrected ? { corrected: p.corrected, raw: p.raw } : null;
  const perLeadArchive = archives ? { stored: true, ...pick(p.corrected!.summary, ['nLeads', 'issues', 'members', 'cases', 'templates']) } : { stored: false, reason: p.reason };
  return { archives, scores: { ...(p.scores ?? {}), perLeadArchive } };
}

const pick = (o: Record<string, unknown>, keys: string[]) => Object.fromEntries(keys.map((k) => [k, o[k]]));

/** A fit job's work: fit, store the version and its archives, activate when asked. */
export async function fitModel(db: Db, job: { gaugeId: string; createdBy: string | null; hold?: JobHold }, p: FitJobParams, progress: JobProgress, signal: AbortSignal) {
  const gauge = await getGauge(db, job.gaugeId);
  if (!gauge) throw new Error(`gauge ${job.gaugeId} no longer exists`);
  await progress('loading the archive', 0);
  const series = await loadArchiveSeries(db, gauge.id, gauge.stepSeconds);
  const defaults = defaultPeriods(series);
  const calibration = p.calibration ? period(p.calibration) : defaults.calibration;
  const validation = p.validation ? period(p.validation) : defaults.validation;
  if (calibration.toMs > validation.fromMs && calibration.fromMs < validation.toMs) throw new Error('the calibration and validation periods overlap');
  const forcingNames = (p.forcings ?? Object.keys(series.forcings)).filter((n) => n in series.forcings).sort();
  // Past runs issued in the held-out archive block give the per-lead archives.
  const blocks = splitValidation(validation, series.stepSeconds * 1000);
  const reforecasts = await loadReforecastSet(db, gauge.id, blocks.archive);
  const onProgress = (pr: { stage: string; percent: number }) => {
    void progress(pr.stage, pr.percent * 0.97);
  };
  const out = p.trainer === 'lstm' ? await fitLstm() : await fitTrees(p.trainer);
  const perLead = perLeadParts(out.perLead);
  const withPerLead = perLead.scores ? { ...out.scores, reforecasts: perLead.scores } : out.scores;
  const updatingMode = p.updating?.mode ?? 'off';
  const notFitted = updatingMode === 'off' ? 'updating: off was asked for' : p.trainer === 'lstm' ? 'issue-time updating is fitted with the trees only, not with the lstm trainer' : 'not fitted';
  const scores = { ...withPerLead, updating: out.updating?.scores ?? { status: 'off', reason: notFitted } };
  const updating = out.updating?.model && out.updating.archive ? { model: out.updating.model, archive: out.updating.archive } : null;
  await progress('storing the model version', 98);
  const versionId = await db.transaction(async (tx) => {
    await job.hold?.(tx);
    const id = await insertModelVersion(tx, {
      gaugeId: gauge.id,
      origin: 'fitted',
      label: p.label ?? `${p.trainer}${p.tuning ? ' tuned' : ''} ${iso(Date.now()).slice(0, 16)}Z`,
      featureSpec: out.spec,
      trainer:
        p.trainer === 'lstm'
          ? { kind: 'lstm', params: out.parts[0].params, model: out.parts[0].info, trials: out.trials, seed: p.seed, rows: out.rows, onnxCheck: out.onnxCheck }
          : { kind: p.trainer, bundle: out.parts.map((part) => ({ params: part.params, validationRmse: part.validationRmse, trees: part.trees })), trials: out.trials, seed: p.seed, rows: out.rows, onnxCheck: out.onnxCheck },
      periods: {
        calibration: { from: iso(calibration.fromMs), to: iso(calibration.toMs) },
        validation: { from: iso(validation.fromMs), to: iso(validation.toMs) },
        stopping: { from: iso(blocks.stopping.fromMs), to: iso(blocks.stopping.toMs) },
        archive: { from: iso(blocks.archive.fromMs), to: iso(blocks.archive.toMs) },
        // The archives' errors come from a block the model did not train, stop or tune on.
        archiveSource: 'held-out',
      },
      scores,
      createdBy: job.createdBy,
      parts: out.parts.map((part) => part.onnx),
      correctedArchive: out.correctedArchive,
      rawArchive: out.rawArchive,
      perLeadArchives: perLead.archives,
      updating,
    });
    if (p.activate) await activateModelVersion(tx, gauge.id, id);
    return id;
  });
  return {
    versionId,
    activated: p.activate,
    scores,
    onnxCheck: out.onnxCheck,
    archives: { leadFree: out.correctedArchive.summary, perLead: perLead.archives?.corrected.summary ?? null, perLeadNote: out.perLead ? out.perLead.reason : 'no past runs (reforecasts) issued in the held-out archive block of the validation period' },
  };

  // Trees (boosting or forest), bundled, tuned and with issue-time updating as asked.
  async function fitTrees(trainer: FitOptions['trainer']): Promise<FitOutput> {
    const options: FitOptions = {
      calibration,
      validation,
      trainer,
      params: p.params,
      tuning: p.tuning ? { ...p.tuning, space: p.trainer === 'gradient-boosting' ? defaultBoostingSpace : defaultForestSpace } : null,
      bundle: p.bundle,
      seed: p.seed,
      simLags: p.simLags,
      forcings: forcingNames.map((name) => ({ name, lags: p.forcingLags })),
      seasonal: p.seasonal,
      transform: p.transform,
      templateLength: p.templateLength,
      maxTrainRows: p.maxTrainRows,
      reforecasts,
      updating: p.updating && p.updating.mode !== 'off'
        ? {
            mode: p.updating.mode,
            leads: p.updating.leads ?? defaultUpdatingLeads(series.stepSeconds, p.templateLength),
            leadBands: p.updating.leadBands ?? null,
            history: p.updating.history,
            trees: p.updating.trees,
            seed: p.seed,
            // The tree candidates are measured, not served: a smaller sample keeps the fit's time in bounds.
            maxTrainRows: Math.min(p.maxTrainRows, 50_000),
          }
        : null,
    };
    const handle = runCompute<FitOutput>({ kind: 'fit', series, options }, onProgress);
    signal.addEventListener('abort', () => handle.cancel());
    return handle.result;
  }

  // The in-house LSTM: the same periods and blocks, its own worker task.
  async function fitLstm(): Promise<FitOutput> {
    const options: LstmFitOptions = {
      calibration,
      validation,
      params: p.params,
      tuning: p.tuning ? { ...p.tuning, space: defaultLstmSpace } : null,
      seed: p.seed,
      forcings: forcingNames,
      seasonal: p.seasonal,
      transform: p.transform,
      templateLength: p.templateLength,
      maxTrainRows: p.maxTrainRows,
      maxStopRows: LSTM_STOP_ROWS,
      reforecasts,
    };
    const handle = runCompute<FitOutput>({ kind: 'fit-lstm', series, options }, onProgress);
    signal.addEventListener('abort', () => handle.cancel());
    return handle.result;
  }
}



/** Builds the raw members' error archive alone, so degraded mode works before any model is fitted. */
export async function buildRawArchive(db: Db, job: { gaugeId: string; hold?: JobHold }, p: RawArchiveJobParams, progress: JobProgress) {
  const gauge = await getGauge(db, job.gaugeId);
  if (!gauge) throw new Error(`gauge ${job.gaugeId} no longer exists`);
  await progress('loading the archive', 5);
  const series = await loadArchiveSeries(db, gauge.id, gauge.stepSeconds);
  const all = { fromMs: series.times[0], toMs: series.times[series.times.length - 1] + 1 };
  await progress('building the raw error archive', 30);
  const out = await runCompute<{ bytes: Uint8Array; summary: Record<string, unknown> }>({ kind: 'raw-archive', series, period: all, archive: p }).result;
  // The raw per-lead archive of all stored past runs; small next to the lead-free one (a few
  // members × leads per run), so it is built here rather than in a worker.
  await progress('building the raw per-lead error archive from past runs', 80);
  const reforecasts = await loadReforecastSet(db, gauge.id, {});
  const perLead = reforecasts ? rawArchiveFromReforecasts(series, reforecasts, { transform: out.summary.transform as ErrorTransform }) : null;
  await db.transaction(async (tx) => {
    await job.hold?.(tx);
    await insertArchive(tx, gauge.id, null, 'raw', out);
    if (perLead?.archive) await insertArchive(tx, gauge.id, null, 'raw', { bytes: archiveToBytes(perLead.archive), summary: { ...perLead.summary } }, 'per-lead');
  });
  return {
    summary: out.summary,
    perLead: perLead?.archive ? perLead.summary : null,
    perLeadNote: !reforecasts ? 'no past runs (reforecasts) stored' : perLead?.archive ? null : (perLead as { reason: string }).reason,
  };
}
