/** Empirical exceedance probability P(X > threshold) of samples; the event is strict "greater than". */

/** Number of values strictly above t in ascending-sorted x[start .. start+n-1] (binary search). */
export function countAboveSorted(
  sorted: ArrayLike<number>,
  t: number,
  start = 0,
  n = sorted.length - start,
): number {
  let lo = start;
  let hi = start + n;
  // First index with x > t (upper bound).
  while (lo < hi) {
    const mid = (lo + hi) >>> 1;
    if (sorted[mid] > t) hi = mid;
    else lo = mid + 1;
  }
  return start + n - lo;
}

/** Fraction of finite values strictly greater than threshold (NaN/null skipped); NaN if none. */
export function exceedanceProbability(values: ArrayLike<number | null>, threshold: number): number {
  let n = 0;
  let above = 0;
  for (let i = 0; i < values.length; i++) {
    const v = values[i];
    if (v === null || !Number.isFinite(v)) continue;
    n++;
    if (v > threshold) above++;
  }
  return n === 0 ? NaN : above / n;
}
