// A model whose inputs reach further back than a run's warm-up (an LSTM window of 30 days, a run
// posted with 10 warm-up values) reads the missing early steps from the archive: each member's
// continuous simulation and the archived forcings, which are what a run's warm-up holds anyway
// (the simulation driven by observed forcings up to issue time). Pure: the caller reads the
// archive slice.
import type { RequiredInputs, RunInput } from './features.ts';

export interface WarmupSlice {
  /**
   * Values at issue − (steps − 1)·step … issue (index j is at issue − (steps − 1 − j)·step);
   * one series per run member (null when the archive holds no simulation of that member), and
   * per forcing. Missing = NaN.
   */
  steps: number;
  members: (ArrayLike<number> | null)[];
  forcings: Record<string, ArrayLike<number>>;
}

/** How many steps at or before issue time the run lacks for the model, at most (0 = none). */
export function warmupShortfall(run: RunInput, need: RequiredInputs): number {
  let short = 0;
  for (const m of run.members) short = Math.max(short, need.simStepsToIssue - (m.length - run.nLeads));
  for (const f of need.forcings) {
    const given = run.forcings?.[f.name];
    if (given === undefined || given === null) continue;
    const series = isNested(given) ? given : [given];
    for (const s of series) short = Math.max(short, f.stepsToIssue - (s.length - run.nLeads));
  }
  return Math.max(0, short);
}

function isNested(v: ArrayLike<number> | ArrayLike<number>[]): v is ArrayLike<number>[] {
  return Array.isArray(v) && v.length > 0 && (Array.isArray(v[0]) || ArrayBuffer.isView(v[0]));
}

/** The series with archive values put in front so that it holds `want` values at or before issue time. */
function extend(series: ArrayLike<number>, nLeads: number, want: number, archive: ArrayLike<number> | null, steps: number): ArrayLike<number> {
  const have = series.length - nLeads;
  if (have >= want) return series;
  const add = want - have;
  const out = new Float64Array(series.length + add).fill(NaN);
  // Archive index of the earliest value to add: time issue − (want − 1)·step.
  const from = steps - want;
  if (archive) for (let j = 0; j < add; j++) out[j] = from + j >= 0 ? Number(archive[from + j]) : NaN;
  for (let i = 0; i < series.length; i++) out[add + i] = Number(series[i]);
  return out;
}

/**
 * The run with each member and forcing lengthened from the archive slice to what the model
 * needs before issue time; values the run gives are kept as given. Series already long enough
 * are returned as they are.
 */
export function withArchiveWarmup(run: RunInput, need: RequiredInputs, slice: WarmupSlice): RunInput {
  const members = run.members.map((m, i) => extend(m, run.nLeads, need.simStepsToIssue, slice.members[i] ?? null, slice.steps));
  const forcings: Record<string, ArrayLike<number> | ArrayLike<number>[]> = { ...(run.forcings ?? {}) };
  for (const f of need.forcings) {
    const given = run.forcings?.[f.name];
    if (given === undefined || given === null) continue;
    const archived = slice.forcings[f.name] ?? null;
    forcings[f.name] = isNested(given)
      ? given.map((s) => extend(s, run.nLeads, f.stepsToIssue, archived, slice.steps))
      : extend(given, run.nLeads, f.stepsToIssue, archived, slice.steps);
  }
  return { ...run, members, forcings };
}
