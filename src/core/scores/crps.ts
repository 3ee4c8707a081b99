/**
 * Ensemble CRPS from sorted members in O(m) after an O(m log m) sort (form used by
 * SpecsVerification's enscrps.cpp): with x(1) ≤ … ≤ x(m),
 *   S = Σ_{i<j} |x_i − x_j| = Σ_j (2j − m − 1)·x(j),
 *   CRPS = Σ|x_i − y|/m − S/m²        (standard: the empirical CDF of the members)
 *   fair CRPS = Σ|x_i − y|/m − S/(m(m − 1))   (Ferro 2014; NaN for m = 1).
 */

/** CRPS of ascending-sorted members x[start .. start+m-1] for observation y. */
export function crpsSorted(
  sorted: ArrayLike<number>,
  y: number,
  fair = false,
  start = 0,
  m = sorted.length - start,
): number {
  if (m <= 0 || (fair && m < 2)) return NaN;
  let abs = 0;
  let s = 0;
  for (let j = 0; j < m; j++) {
    const x = sorted[start + j];
    abs += Math.abs(x - y);
    s += (2 * (j + 1) - m - 1) * x;
  }
  const spread = fair ? s / (m * (m - 1)) : s / (m * m);
  return abs / m - spread;
}

/** CRPS of unsorted members for observation y (sorts a copy). */
export function crpsEnsemble(members: ArrayLike<number>, y: number, fair = false): number {
  return crpsSorted(Float64Array.from(members).sort(), y, fair);
}

/**
 * CRPS of members with weights (normalised to sum 1), by exact integration of (F(x) − 1{x ≥ y})²
 * over the weighted empirical CDF F. `order` (the member indices by ascending value) may be given
 * when the caller scores the same members against several weightings.
 */
export function crpsWeighted(
  members: ArrayLike<number>,
  weights: ArrayLike<number>,
  y: number,
  order: ArrayLike<number> = ascendingOrder(members),
): number {
  const m = members.length;
  if (m === 0 || weights.length !== m || order.length !== m) throw new RangeError('members, weights and order must be non-empty and of equal length');
  let total = 0;
  for (let i = 0; i < m; i++) total += weights[i];
  let crps = 0;
  const x0 = members[order[0]];
  if (y < x0) crps += x0 - y; // F = 0 and the step is 1 left of the first member
  let f = 0;
  for (let k = 0; k < m; k++) {
    const a = members[order[k]];
    f += weights[order[k]] / total;
    if (k === m - 1) {
      if (y > a) crps += y - a; // F = 1 right of the last member, step still 0 until y
      break;
    }
    const b = members[order[k + 1]];
    if (y <= a) crps += (1 - f) ** 2 * (b - a);
    else if (y >= b) crps += f * f * (b - a);
    else crps += f * f * (y - a) + (1 - f) ** 2 * (b - y);
  }
  return crps;
}

/** Indices of the values in ascending order (stable for ties). */
export function ascendingOrder(values: ArrayLike<number>): number[] {
  return Array.from({ length: values.length }, (_, i) => i).sort((a, b) => values[a] - values[b]);
}

/**
 * CRPS per case for ensembles laid out row-major (nCases × nMembers); NaN where the observation
 * is missing. `scratch` (length ≥ nMembers) avoids an allocation per case.
 */
export function crpsPerCase(
  ensembles: ArrayLike<number>,
  obs: ArrayLike<number | null>,
  nMembers: number,
  fair = false,
  scratch: Float64Array = new Float64Array(nMembers),
): Float64Array {
  const nCases = obs.length;
  if (ensembles.length !== nCases * nMembers) throw new RangeError('ensembles must hold obs.length × nMembers values');
  const out = new Float64Array(nCases);
  const row = scratch.subarray(0, nMembers);
  for (let c = 0; c < nCases; c++) {
    const y = obs[c];
    if (y === null || !Number.isFinite(y)) {
      out[c] = NaN;
      continue;
    }
    for (let j = 0; j < nMembers; j++) row[j] = ensembles[c * nMembers + j];
    row.sort();
    out[c] = crpsSorted(row, y, fair);
  }
  return out;
}

/** Mean CRPS over the cases with an observation; `n` is the number of cases used. */
export function meanCrps(
  ensembles: ArrayLike<number>,
  obs: ArrayLike<number | null>,
  nMembers: number,
  fair = false,
): { crps: number; n: number } {
  const per = crpsPerCase(ensembles, obs, nMembers, fair);
  let s = 0;
  let n = 0;
  for (let i = 0; i < per.length; i++) {
    if (Number.isNaN(per[i])) continue;
    s += per[i];
    n++;
  }
  return { crps: n === 0 ? NaN : s / n, n };
}
