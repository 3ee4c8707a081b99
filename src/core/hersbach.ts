import { HersbachAccumulator } from './verification/hersbach-accumulator.ts';

/**
 * Decomposition of the mean ensemble CRPS (Hersbach 2000): CRPS = reliability + potential,
 * potential = uncertainty − resolution.
 *
 * Per case, members sorted x_1 ≤ … ≤ x_N; bin i (0 … N) has forecast probability p_i = i/N.
 * Interior bin i between x_i and x_{i+1} (width w): α_i = clip(y − x_i, 0, w), β_i = w − α_i
 * (clipping keeps both neighbouring bins when y equals a member). Outlier bins:
 * β_0 = x_1 − y when y < x_1, α_N = y − x_N when y > x_N.
 * Averages over cases: interior ḡ_i = ᾱ_i + β̄_i, ō_i = β̄_i/ḡ_i; outliers ō_0 = mean 1{y ≤ x_1},
 * ḡ_0 = β̄_0/ō_0; ō_N = mean 1{y ≤ x_N}, ḡ_N = ᾱ_N/(1 − ō_N) (0 when the divisor is 0).
 * reliability = Σ ḡ_i(ō_i − p_i)², potential = Σ ḡ_i ō_i(1 − ō_i).
 * uncertainty = CRPS of the observations' own sample climatology = Σ_{i<j}|y_i − y_j|/n².
 */
export interface HersbachDecomposition {
  /** Cases used (observation present). */
  n: number;
  /** Mean standard CRPS computed directly from the members (equals reliability + potential). */
  crps: number;
  reliability: number;
  potential: number;
  uncertainty: number;
  /** uncertainty − potential. */
  resolution: number;
  /** Per bin i = 0 … N: p_i, ḡ_i (mean width) and ō_i (observed frequency). */
  p: Float64Array;
  g: Float64Array;
  o: Float64Array;
}

export function hersbachDecomposition(
  ensembles: ArrayLike<number>,
  obs: ArrayLike<number | null>,
  nMembers: number,
): HersbachDecomposition {
  const N = nMembers;
  const nCases = obs.length;
  if (N < 1 || ensembles.length !== nCases * N) throw new RangeError('ensembles must hold obs.length × nMembers values');
  // The same sums, case by case, as a streamed hindcast gathers them.
  const sums = new HersbachAccumulator(N);
  const row = new Float64Array(N);
  for (let c = 0; c < nCases; c++) {
    const y = obs[c];
    if (y === null || !Number.isFinite(y)) continue;
    for (let j = 0; j < N; j++) row[j] = ensembles[c * N + j];
    row.sort();
    sums.add(row, y);
  }
  return sums.result();
}
