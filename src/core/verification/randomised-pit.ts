/**
 * PIT of y among ascending-sorted values x[0 … m−1], randomised among ties — the same rule as
 * pitValues (src/core/scores/pit.ts): (below + u·(ties + 1))/(m + 1), u uniform in [0, 1). Exactly
 * uniform for an exchangeable (calibrated) ensemble of any size. Binary search: O(log m).
 */
export function pitFromSorted(sorted: ArrayLike<number>, m: number, y: number, u: number): number {
  let lo = 0;
  let hi = m;
  while (lo < hi) {
    const mid = (lo + hi) >>> 1;
    if (sorted[mid] < y) lo = mid + 1;
    else hi = mid;
  }
  const below = lo;
  hi = m;
  while (lo < hi) {
    const mid = (lo + hi) >>> 1;
    if (sorted[mid] <= y) lo = mid + 1;
    else hi = mid;
  }
  return (below + u * (lo - below + 1)) / (m + 1);
}

/**
 * Share of PIT values inside the central interval [(1 − level)/2, (1 + level)/2]: the coverage a
 * central `level` interval has when its ends are read from the forecast CDF itself. Unlike the
 * band between two definition-7 member quantiles, its expectation is exactly `level` for a
 * calibrated ensemble of any size. NaN values are skipped.
 */
export function pitCoverage(pit: ArrayLike<number>, level: number): { n: number; coverage: number } {
  const lo = (1 - level) / 2;
  const hi = (1 + level) / 2;
  let n = 0;
  let inside = 0;
  for (let i = 0; i < pit.length; i++) {
    const v = pit[i];
    if (Number.isNaN(v)) continue;
    n++;
    if (v >= lo && v <= hi) inside++;
  }
  return { n, coverage: n ? inside / n : NaN };
}
