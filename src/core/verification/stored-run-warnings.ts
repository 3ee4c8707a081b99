import type { WarningRun } from './warning-verification.ts';

/**
 * A stored run in the form the warning verification takes: raw and corrected members as
 * trajectories, the published forecast as its stored quantiles (ascending per lead) with the
 * exceedance and any-time probabilities exactly as they were issued. Sources in the order raw,
 * corrected, stochastic. Observations are looked up by valid time (missing = NaN); persistence is
 * the last observation at or before issue time, found by the caller.
 */
export interface StoredRunForWarnings {
  issueMs: number;
  validMs: ArrayLike<number>;
  raw: readonly { values: readonly number[] }[];
  corrected: readonly { values: readonly number[] }[];
  /** Per lead, the stage's quantiles at the midpoint levels. */
  percentiles: readonly (readonly number[])[];
  /** Per gauge threshold, in the gauge's order: as issued. */
  thresholds: readonly { exceedance: readonly number[]; anyTime: number }[];
}

export function warningRunFromStored(r: StoredRunForWarnings, observedAt: (validMs: number) => number, persistence: number): WarningRun {
  const H = r.validMs.length;
  const members = (list: readonly { values: readonly number[] }[]) => {
    const out = new Float64Array(list.length * H);
    list.forEach((m, j) => {
      for (let k = 0; k < H; k++) {
        const v = m.values[k];
        out[j * H + k] = v === null || v === undefined ? NaN : v;
      }
    });
    return { values: out, count: list.length, trajectories: true };
  };
  let K = 0;
  for (const q of r.percentiles) K = Math.max(K, q?.length ?? 0);
  const quant = new Float64Array(K * H).fill(NaN);
  for (let k = 0; k < H; k++) {
    const q = r.percentiles[k] ?? [];
    for (let i = 0; i < q.length; i++) quant[i * H + k] = q[i];
  }
  const T = r.thresholds.length;
  const exceedance = new Float64Array(T * H).fill(NaN);
  const anyTime = new Float64Array(T).fill(NaN);
  r.thresholds.forEach((t, i) => {
    for (let k = 0; k < H; k++) exceedance[i * H + k] = t.exceedance[k] ?? NaN;
    anyTime[i] = t.anyTime ?? NaN;
  });
  return {
    issueMs: r.issueMs,
    nLeads: H,
    validMs: r.validMs,
    observed: Float64Array.from(r.validMs, (t) => observedAt(t)),
    persistence,
    sources: [members(r.raw), members(r.corrected), { values: quant, count: K, trajectories: false, sortedPerLead: true, exceedance, anyTime }],
  };
}
