// Serving a sequence model whose window reaches further back than a run's warm-up: the missing
// early steps are read from the archive (the members' continuous simulations and the archived
// forcings) and put in front of the run. Runs that are long enough, and flat models, pass as they are.
import type { RunInput } from '../core/features.ts';
import { isSequenceSpec, requiredRunInputs, specForcings, type ResidualSpec } from '../core/model-inputs.ts';
import { warmupShortfall, withArchiveWarmup } from '../core/run-warmup.ts';
import type { Queryable } from '../store/db.ts';
import { loadWarmupSlice } from '../store/warmup-slice.ts';

export async function withWindowWarmup(db: Queryable, gauge: { id: string; stepSeconds: number }, spec: ResidualSpec | null, run: RunInput, memberIds: string[]): Promise<RunInput> {
  if (!spec || !isSequenceSpec(spec)) return run;
  const need = requiredRunInputs(spec);
  if (warmupShortfall(run, need) === 0) return run;
  const steps = Math.max(need.simStepsToIssue, ...need.forcings.map((f) => f.stepsToIssue));
  const slice = await loadWarmupSlice(db, gauge.id, gauge.stepSeconds, run.issueTime, steps, memberIds, specForcings(spec));
  return withArchiveWarmup(run, need, slice);
}
