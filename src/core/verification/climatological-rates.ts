/**
 * Climatological probabilities of the warning events over a reference period (the model's
 * fitting period), the reference of the Brier skill score: the share of observed steps above the
 * threshold, and for "above at any time in the horizon" the share of windows of `horizon`
 * consecutive steps, fully observed, in which some observation is above it. Times ascending, one
 * value per step; missing values break windows.
 */
export interface ClimatologicalRate {
  threshold: number;
  /** P(observation > threshold) at one time. */
  atLead: number;
  /** P(max over `horizon` consecutive steps > threshold). */
  anyTime: number;
  steps: number;
  windows: number;
}

export function climatologicalRates(
  values: ArrayLike<number | null>,
  thresholds: readonly number[],
  horizon: number,
): ClimatologicalRate[] {
  if (!Number.isInteger(horizon) || horizon < 1) throw new RangeError('horizon must be a positive integer');
  const n = values.length;
  const v = Float64Array.from({ length: n }, (_, i) => {
    const x = values[i];
    return x === null || !Number.isFinite(x) ? NaN : x;
  });
  return thresholds.map((thr) => {
    let steps = 0;
    let above = 0;
    for (let i = 0; i < n; i++) {
      if (Number.isNaN(v[i])) continue;
      steps++;
      if (v[i] > thr) above++;
    }
    // Sliding window: observed count and above count over the last `horizon` steps.
    let windows = 0;
    let hit = 0;
    let obs = 0;
    let ab = 0;
    for (let i = 0; i < n; i++) {
      if (!Number.isNaN(v[i])) {
        obs++;
        if (v[i] > thr) ab++;
      }
      const j = i - horizon;
      if (j >= 0 && !Number.isNaN(v[j])) {
        obs--;
        if (v[j] > thr) ab--;
      }
      if (i >= horizon - 1 && obs === horizon) {
        windows++;
        if (ab > 0) hit++;
      }
    }
    return { threshold: thr, atLead: steps ? above / steps : NaN, anyTime: windows ? hit / windows : NaN, steps, windows };
  });
}
