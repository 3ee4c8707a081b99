// Serving side of issue-time updating: whether a run is updated, on which observation, with which
// error archive, and what the answer says about it. Reads only observations at or before the run's
// issue time.
import { FeatureInputError, type RunInput } from '../core/features/features.ts';
import { checkResidualSpec } from '../core/features/model-inputs.ts';
import { chooseIssueObservation, type IssueObservation } from '../core/correction/issue-observation.ts';
import { checkUpdatingModel, updatingWarmupProblem, type UpdatingModel } from '../core/correction/updating.ts';
import { observationTimeInputs } from '../core/correction/updating-rows.ts';
import type { Queryable } from '../store/db.ts';
import { readObservations } from '../store/archive-repo.ts';
import { versionArchiveInfo, type ArchiveInfo } from '../store/models-repo.ts';
import { archiveReach } from '../core/stochastic/archive-choice.ts';

export interface UpdatingAnswer {
  status: 'on' | 'off';
  reason: string | null;
  observation: { time: string; value: number; source: 'run' | 'archive'; ageSteps: number } | null;
  method: 'ar1' | 'phi-per-lead' | null;
}

export interface UpdatingDecision {
  answer: UpdatingAnswer;
  /** What the correction worker needs (null = not updated). */
  correct: { model: UpdatingModel; observation: number; ageSteps: number } | null;
  /** The updated members' per-lead error archive, when updating is on. */
  archive: ArchiveInfo | null;
  /** The observation to store with the run (the run's own one always; a stored one when used). */
  stored: IssueObservation | null;
}

const iso = (ms: number) => new Date(ms).toISOString().replace('.000Z', 'Z');

export async function decideUpdating(
  db: Queryable,
  gauge: { id: string; stepSeconds: number; updatingMaxAgeSteps: number },
  version: { id: string; featureSpec: unknown; updating: unknown },
  run: RunInput,
  warmupSteps: number,
  fromRun: number | null | undefined,
): Promise<UpdatingDecision> {
  const stepMs = gauge.stepSeconds * 1000;
  const maxAge = gauge.updatingMaxAgeSteps;
  // A month of steps further back than allowed, only to say how old the latest observation is.
  const stored = await readObservations(db, gauge.id, { fromMs: run.issueTime - (maxAge + 30) * stepMs, toMs: run.issueTime + 1 });
  const choice = chooseIssueObservation(run.issueTime, gauge.stepSeconds, maxAge, fromRun, stored);
  const runObs = choice.observation?.source === 'run' ? choice.observation : null;
  const off = (reason: string, method: UpdatingAnswer['method'] = null): UpdatingDecision => ({
    answer: { status: 'off', reason, observation: null, method },
    correct: null,
    archive: null,
    stored: runObs,
  });
  if (!version.updating) return off(`model version ${version.id} has no issue-time updater (fitted with updating off, or auto found no lead time where it helps)`);
  const model = checkUpdatingModel(version.updating);
  if (!choice.observation) return off(choice.reason, model.method);
  const o = choice.observation;
  const spec = checkResidualSpec(version.featureSpec);
  const warm = updatingWarmupProblem(spec, warmupSteps, o.ageSteps);
  if (warm) return off(`${warm}; the run was corrected without updating`, model.method);
  try {
    observationTimeInputs(spec, run, o.ageSteps);
  } catch (err) {
    if (!(err instanceof FeatureInputError)) throw err;
    return off(`${err.message}; the run was corrected without updating`, model.method);
  }
  const archive = await versionArchiveInfo(db, version.id, 'corrected', 'updating');
  if (!archive) return off(`model version ${version.id} has no error archive of updated members`, model.method);
  if (archiveReach(archive) < run.nLeads) return off(`the updated members' error archive covers ${archiveReach(archive)} lead times; the run has ${run.nLeads}`, model.method);
  return {
    answer: { status: 'on', reason: null, observation: { time: iso(o.timeMs), value: o.value, source: o.source, ageSteps: o.ageSteps }, method: model.method },
    correct: { model, observation: o.value, ageSteps: o.ageSteps },
    archive,
    stored: o,
  };
}
