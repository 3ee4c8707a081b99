/**
 * Alpha reliability index (Renard et al. 2010): α = 1 − (2/n)·Σ_t |p(t) − u_t|, p(t) the
 * ascending-sorted PIT values and u_t = t/(n + 1), t = 1 … n (Weibull plotting positions, the
 * convention used here). 1 is perfect, 0 is the worst. NaN PIT values are skipped.
 */
export function alphaIndex(pit: ArrayLike<number>): number {
  const sorted = finiteSorted(pit);
  const n = sorted.length;
  if (n === 0) return NaN;
  let s = 0;
  for (let t = 1; t <= n; t++) s += Math.abs(sorted[t - 1] - t / (n + 1));
  return 1 - (2 / n) * s;
}

/** Non-NaN values, ascending. */
export function finiteSorted(x: ArrayLike<number>): Float64Array {
  let n = 0;
  for (let i = 0; i < x.length; i++) if (!Number.isNaN(x[i])) n++;
  const out = new Float64Array(n);
  let j = 0;
  for (let i = 0; i < x.length; i++) if (!Number.isNaN(x[i])) out[j++] = x[i];
  return out.sort();
}
