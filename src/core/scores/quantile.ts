/**
 * Sample quantiles, Hyndman & Fan (1996) definition 7 (numpy's default 'linear' method):
 * with n sorted values x[0..n-1], h = (n − 1)·p, Q(p) = x[⌊h⌋] + (h − ⌊h⌋)·(x[⌊h⌋+1] − x[⌊h⌋]).
 */

/** Quantile p of the already ascending-sorted values x[start .. start+n-1]. NaN when n = 0. */
export function quantileSorted(
  sorted: ArrayLike<number>,
  p: number,
  start = 0,
  n = sorted.length - start,
): number {
  if (n <= 0) return NaN;
  if (!(p >= 0 && p <= 1)) throw new RangeError(`probability must be in [0, 1], got ${p}`);
  const h = (n - 1) * p;
  const lo = Math.floor(h);
  const a = sorted[start + lo];
  if (lo >= n - 1) return a;
  const b = sorted[start + lo + 1];
  const f = h - lo;
  // Written as a + f(b − a) but exact at both ends and monotone in p.
  return f === 0 ? a : a + f * (b - a);
}

/** Finite values of `values` (NaN, null and ±Infinity skipped) copied into a sorted Float64Array. */
export function sortedFinite(values: ArrayLike<number | null>): Float64Array {
  let n = 0;
  for (let i = 0; i < values.length; i++) {
    const v = values[i];
    if (v !== null && Number.isFinite(v)) n++;
  }
  const out = new Float64Array(n);
  let j = 0;
  for (let i = 0; i < values.length; i++) {
    const v = values[i];
    if (v !== null && Number.isFinite(v)) out[j++] = v;
  }
  return out.sort();
}

/** Quantiles (definition 7) of the finite values for each probability; NaN where no value is left. */
export function quantiles(
  values: ArrayLike<number | null>,
  probs: ArrayLike<number>,
): Float64Array {
  const s = sortedFinite(values);
  const out = new Float64Array(probs.length);
  for (let i = 0; i < probs.length; i++) out[i] = quantileSorted(s, probs[i]);
  return out;
}
