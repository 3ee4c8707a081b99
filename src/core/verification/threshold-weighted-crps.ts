/**
 * Threshold-weighted CRPS (Gneiting & Ranjan 2011) with weight w(z) = 1{z ≥ r}: the CRPS
 * integral ∫ (F(z) − 1{y ≤ z})² w(z) dz over the flood range only. For an ensemble it equals the
 * kernel form of the CRPS after the chaining map v(z) = max(z, r) (Allen et al. 2023):
 *   twCRPS = mean |v(x_i) − v(y)| − Σ_{i,j} |v(x_i) − v(x_j)| / (2m²),
 * so it is the ordinary ensemble CRPS of the members and the observation cut at r from below.
 * v keeps the order, so sorted members stay sorted. Zero when members and observation are all
 * at or below r.
 */
export function thresholdWeightedCrpsSorted(sorted: ArrayLike<number>, y: number, r: number, start = 0, m = sorted.length - start): number {
  if (m <= 0) return NaN;
  const vy = y > r ? y : r;
  let abs = 0;
  let s = 0;
  for (let j = 0; j < m; j++) {
    const x = sorted[start + j];
    const v = x > r ? x : r;
    abs += Math.abs(v - vy);
    s += (2 * (j + 1) - m - 1) * v;
  }
  return abs / m - s / (m * m);
}
