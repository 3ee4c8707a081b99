import { CancelledError } from '../core/cancelled.ts';
import type { ArchiveSeries, Period, ReforecastSet } from '../core/archive-types.ts';
import type { ResidualSpec } from '../core/features/model-inputs.ts';
import { leadGrowthScale } from '../core/stochastic/lead-growth.ts';
import { evaluateReforecasts, type ReforecastEvaluation } from './reforecast-evaluation.ts';
import { forcingPathsSummary, type Evaluation, type ResidualPredictor } from './residual-evaluation.ts';
import { fitUpdating, type UpdatingFit, type UpdatingOptions } from './updating-fit.ts';

/** Updating was asked for with mode 'on' and could not be fitted (the request's updating.mode is why it fails). */
export class UpdatingFitError extends Error {
  readonly field = 'updating.mode';
  constructor(message: string) {
    super(`updating: on was asked for, but ${message}`);
    this.name = 'UpdatingFitError';
  }
}

export interface AfterEvaluation {
  perLead: ReforecastEvaluation | null;
  /** The issue-time updater, its candidates' scores and archive; null when not asked for. */
  updating: UpdatingFit | null;
  /** Why updating was asked for but not fitted (auto only; `on` fails the fit instead). */
  updatingError: string | null;
}

/**
 * What every fitted or uploaded residual model gets once its lead-free archive is built, whatever
 * kind of model it is (trees, LSTM, an upload): the per-lead archives from the gauge's past runs,
 * the lead-free archive's growth with lead (a scale, and the forecast-forcing paths where they
 * reach), and the issue-time updater with its own archive. `evaluation` is completed in place.
 */
export async function pastRunsAndUpdating(input: {
  series: ArchiveSeries;
  spec: ResidualSpec;
  predictors: ResidualPredictor[];
  evaluation: Evaluation;
  reforecasts: ReforecastSet | null | undefined;
  updating: UpdatingOptions | null | undefined;
  validation: Period;
  archiveBlock: Period;
  onProgress: (p: { stage: string; percent: number }) => void;
  shouldStop: () => boolean;
}): Promise<AfterEvaluation> {
  const { series, spec, predictors, evaluation, onProgress, shouldStop } = input;
  let perLead: ReforecastEvaluation | null = null;
  if (input.reforecasts) {
    onProgress({ stage: 'building the per-lead error archives from the past runs', percent: 95 });
    // The lead-free archive's resolved transform, so both archives' errors share one scale.
    perLead = await evaluateReforecasts(series, input.reforecasts, spec, predictors, { transform: evaluation.correctedArchive.transform });
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
  const o = input.updating;
  if (o && o.mode !== 'off') {
    onProgress({ stage: 'fitting issue-time updating on pseudo-forecasts', percent: 96 });
    try {
      updating = await fitUpdating(series, spec, input.validation, predictors, evaluation.correctedArchive.transform, o, shouldStop, perLead?.values ?? null, input.archiveBlock, forcingErrorVariance);
      // The stage's kernel and k as chosen on the lead-free archive's held-out errors.
      if (updating.archive && evaluation.correctedArchive.neighbours) updating.archive.archive.neighbours = evaluation.correctedArchive.neighbours;
      // Pseudo-forecasts lack the forecast-forcing error as the simulations do: the same paths.
      if (updating.archive && perLead?.forcingPaths) {
        updating.archive.archive.forcingPaths = perLead.forcingPaths;
        updating.archive.summary.forcingPaths = forcingPathsSummary(updating.archive.archive);
      }
    } catch (err) {
      if (err instanceof CancelledError) throw err;
      if (o.mode === 'on') throw new UpdatingFitError((err as Error).message);
      updatingError = (err as Error).message;
    }
  }
  return { perLead, updating, updatingError };
}
