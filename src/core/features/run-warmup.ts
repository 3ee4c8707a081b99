// A run posted with the lead times only (or a warm-up shorter than its model reads: an LSTM window
// of 30 days, trees with 5 lags) takes the missing early steps from the archive: each member's
// continuous simulation and the archived forcings, which are what a run's warm-up holds anyway
// (the simulation driven by observed forcings up to issue time). Pure: the caller reads the
// archive slice.

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

/** One series of a run (a member's simulated flow or a forcing) and what the model reads of it. */
export interface WarmupSeries {
  /** The run's values: warm-up, then one per lead time (missing = NaN). */
  values: ArrayLike<number>;
  /** Values at or before issue time the model needs. */
  needed: number;
  /** Values at or before issue time worth having (needed, plus what issue-time updating reads). */
  wanted: number;
  /** The archive's values at issue − (sliceSteps − 1)·step … issue, or null when it has none. */
  archived: ArrayLike<number> | null;
}

export interface FilledSeries {
  /** The series with `wanted` values at or before issue time, then the lead times. */
  values: Float64Array;
  /** Steps before issue time (0 = the issue time) whose value came from the archive. */
  taken: number[];
  /** Steps before issue time the model needs and neither the run nor the archive has. */
  missing: number[];
}

/** Whether a series lacks values the model wants before issue time, or has a needed one missing. */
export function warmupGap(s: WarmupSeries, nLeads: number): boolean {
  const have = s.values.length - nLeads;
  if (have < s.wanted) return true;
  for (let back = 0; back < s.needed; back++) if (!Number.isFinite(Number(s.values[have - 1 - back]))) return true;
  return false;
}

/**
 * The series lengthened to `wanted` values at or before issue time, its missing values filled
 * from the archive slice; values the run gives are kept as given.
 */
export function fillWarmup(s: WarmupSeries, nLeads: number, sliceSteps: number): FilledSeries {
  const have = s.values.length - nLeads;
  const warm = Math.max(have, s.wanted);
  const values = new Float64Array(warm + nLeads).fill(NaN);
  for (let i = 0; i < s.values.length; i++) values[warm - have + i] = Number(s.values[i]);
  const taken: number[] = [];
  const missing: number[] = [];
  // Index warm − 1 − back is `back` steps before issue; the slice's index sliceSteps − 1 − back too.
  for (let back = 0; back < s.wanted; back++) {
    const j = warm - 1 - back;
    if (Number.isFinite(values[j])) continue;
    const v = s.archived && back < sliceSteps ? Number(s.archived[sliceSteps - 1 - back]) : NaN;
    if (Number.isFinite(v)) {
      values[j] = v;
      taken.push(back);
    } else if (back < s.needed) missing.push(back);
  }
  return { values, taken, missing };
}
