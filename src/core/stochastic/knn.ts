/**
 * k-nearest-neighbour resampling (Lall & Sharma 1996): among the k cases nearest to a value,
 * the j-th nearest is drawn with probability (1/j) / Σ_{i=1..k} (1/i); default k = round(√n).
 */

/** Kernel probabilities for k neighbours, nearest first. k = 3 → 6/11, 3/11, 2/11. */
export function lallSharmaWeights(k: number): Float64Array {
  const w = new Float64Array(k);
  let s = 0;
  for (let j = 1; j <= k; j++) s += 1 / j;
  for (let j = 1; j <= k; j++) w[j - 1] = 1 / j / s;
  return w;
}

/** Default neighbour count for n candidate cases: round(√n), at least 1 (Lall & Sharma 1996). */
export function defaultK(n: number): number {
  return Math.max(1, Math.round(Math.sqrt(n)));
}

/** Cumulative sums c[j] = Σ_{i=1..j+1} 1/i for j < length; one table serves every k ≤ length. */
export function harmonicCumulative(length: number, out: Float64Array = new Float64Array(length)): Float64Array {
  let s = 0;
  for (let j = 0; j < length; j++) {
    s += 1 / (j + 1);
    out[j] = s;
  }
  return out;
}

/** Kernel draw: index 0 … k−1 (0 = nearest) for a uniform u in [0, 1), by binary search. */
export function pickKernelIndex(cum: Float64Array, k: number, u: number): number {
  const target = u * cum[k - 1];
  let lo = 0;
  let hi = k - 1;
  while (lo < hi) {
    const mid = (lo + hi) >>> 1;
    if (cum[mid] > target) hi = mid;
    else lo = mid + 1;
  }
  return lo;
}

/**
 * The k cases nearest to x among pred[lo … hi−1] (ascending), nearest first, found by binary
 * search and a two-way walk; equal distances prefer the lower predictor. Writes values[index]
 * of each to out[outOffset …] and returns how many were written (min(k, hi − lo)).
 */
export function nearestSorted(
  pred: ArrayLike<number>,
  values: ArrayLike<number>,
  lo: number,
  hi: number,
  x: number,
  k: number,
  out: Float64Array,
  outOffset = 0,
): number {
  let a = lo;
  let b = hi;
  while (a < b) {
    const mid = (a + b) >>> 1;
    if (pred[mid] < x) a = mid + 1;
    else b = mid;
  }
  let left = a - 1;
  let right = a;
  const want = Math.min(k, hi - lo);
  for (let j = 0; j < want; j++) {
    let take: number;
    if (left < lo) take = right++;
    else if (right >= hi) take = left--;
    else if (x - pred[left] <= pred[right] - x) take = left--;
    else take = right++;
    out[outOffset + j] = values[take];
  }
  return want;
}

/** Distance in days between two days of year on a circular year of 365.25 days. */
export function circularDayDistance(a: number, b: number): number {
  // The remainder (a slow library call) only when it changes anything: d % 365.25 is d itself
  // below 365.25, which covers every pair of days of year.
  let d = Math.abs(a - b);
  if (!(d < 365.25)) d %= 365.25;
  return Math.min(d, 365.25 - d);
}

/** Neighbour kernels the stochastic stage can use to weight the k nearest cases by rank. */
export type NeighbourKernel = 'lall-sharma' | 'uniform' | 'rank-gaussian';
export const NEIGHBOUR_KERNELS: readonly NeighbourKernel[] = ['lall-sharma', 'uniform', 'rank-gaussian'];

/**
 * Cumulative kernel weights c[j] = Σ_{i ≤ j} w_i for the ranks j = 0 … k−1 (0 = nearest):
 *  - 'lall-sharma': w_j = 1/(j + 1) (Lall & Sharma 1996);
 *  - 'uniform':     w_j = 1 (every one of the k nearest equally likely);
 *  - 'rank-gaussian': w_j = exp(−½ (j / (k/2))²), a Gaussian in rank with half of k as its
 *    width (our own choice: between the two above in how much it leans on the nearest).
 */
export function kernelCumulative(kernel: NeighbourKernel, k: number, out: Float64Array = new Float64Array(k)): Float64Array {
  let s = 0;
  const width = k / 2;
  for (let j = 0; j < k; j++) {
    s += kernel === 'lall-sharma' ? 1 / (j + 1) : kernel === 'uniform' ? 1 : Math.exp(-0.5 * (j / width) ** 2);
    out[j] = s;
  }
  return out;
}

/** Effective number of cases 1/Σp_j² of a kernel over k neighbours. */
export function kernelEffectiveSize(kernel: NeighbourKernel, k: number): number {
  const c = kernelCumulative(kernel, k);
  let s2 = 0;
  for (let j = 0; j < k; j++) s2 += ((c[j] - (j ? c[j - 1] : 0)) / c[k - 1]) ** 2;
  return 1 / s2;
}
