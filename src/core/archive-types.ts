// The shapes in which a gauge's stored archive reaches the computation: read by the store
// (src/store/archive-series.ts), fitted and evaluated in src/models, run through hindcasts.
// Plain data only, so every layer can name them without importing the one that builds them.

/** A gauge's archive on one regular time axis (missing = NaN), as the fitting code needs it. */
export interface ArchiveSeries {
  stepSeconds: number;
  /** Epoch ms, regular step. */
  times: Float64Array;
  observed: Float64Array;
  forcings: Record<string, Float64Array>;
  members: { id: string; values: Float64Array }[];
}

/** A time window, epoch ms. */
export interface Period {
  fromMs: number;
  /** Exclusive. */
  toMs: number;
}

/** Stored past runs of a gauge on one layout: what the per-lead error archives are built from. */
export interface ReforecastSet {
  /** Issue times, epoch ms, ascending. */
  issueTimes: Float64Array;
  /** Longest lead stored (steps). */
  nLeads: number;
  /** Members with stored runs, sorted by id. */
  memberIds: string[];
  /** [(issue·memberIds.length + member)·nLeads + lead]; lead 0 is one step after issue time; NaN = missing. */
  values: Float64Array;
  /** Forecast forcings the runs were driven by, per variable: [issue·nLeads + lead]; NaN = not stored. */
  forcings?: Record<string, Float64Array>;
}
