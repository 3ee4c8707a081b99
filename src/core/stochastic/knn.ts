import type { Prng } from '../prng.ts';

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

/**
 * The errors of the k cases nearest to x among cP[1 … nCand] (ascending, with sentinels
 * cP[0] = −∞ and cP[nCand + 1] = +∞), nearest first, into out[outBase …]. Cases at equal
 * distance are ordered at random: the nearest-first walk takes an interval of the sorted
 * candidates; when the k-th distance is shared by cases outside it, or distances repeat inside
 * it, the cases at each repeated distance are chosen and ordered by a seeded random shuffle.
 */
export function nearestWithRandomTies(
  x: number,
  cP: Float64Array,
  cE: Float64Array,
  nCand: number,
  k: number,
  out: Float64Array,
  outBase: number,
  scratch: Int32Array,
  rng: Prng,
): void {
  // Branch-free binary search: b ends on the last candidate below x.
  let b = 0;
  let len = nCand + 2;
  while (len > 1) {
    const half = len >>> 1;
    b += +(cP[b + half] < x) * half;
    len -= half;
  }
  let l = b;
  let r = b + 1;
  let prev = -1;
  let repeated = false;
  for (let j = 0; j < k; j++) {
    const dl = x - cP[l];
    const dr = cP[r] - x;
    const takeLeft = dl <= dr;
    const d = takeLeft ? dl : dr;
    if (d === prev) repeated = true;
    prev = d;
    out[outBase + j] = cE[takeLeft ? l-- : r++];
  }
  // prev is now the k-th distance; a tie beyond the interval or within it needs the slow path.
  if (!repeated && x - cP[l] !== prev && cP[r] - x !== prev) return;
  // Widen the interval to every case at the k-th distance, then write the cases in order of
  // distance, each run of equal distance shuffled and cut to what is left of k.
  while (x - cP[l] === prev) l--;
  while (cP[r] - x === prev) r++;
  // Cases l+1 … r−1 sorted by distance: a two-way merge from b outwards.
  let n = 0;
  let a = b;
  let c = b + 1;
  while (a > l || c < r) {
    const da = a > l ? x - cP[a] : Infinity;
    const dc = c < r ? cP[c] - x : Infinity;
    scratch[n++] = da <= dc ? a-- : c++;
  }
  let written = 0;
  let s = 0;
  while (written < k) {
    const d = Math.abs(cP[scratch[s]] - x);
    let e = s + 1;
    while (e < n && Math.abs(cP[scratch[e]] - x) === d) e++;
    // Fisher–Yates on the run s … e−1, only as far as needed.
    const take = Math.min(e - s, k - written);
    for (let i = 0; i < take; i++) {
      const p = s + i + rng.nextInt(e - s - i);
      const tmp = scratch[s + i];
      scratch[s + i] = scratch[p];
      scratch[p] = tmp;
      out[outBase + written++] = cE[scratch[s + i]];
    }
    s = e;
  }
}

/**
 * The k cases nearest to x among cP[1 … nCand] (ascending, sentinels cP[0] = −∞ and
 * cP[nCand + 1] = +∞, 1 ≤ k ≤ nCand) as a window of the sorted candidates: returns a, the window
 * being cP[a … a + k − 1], found by binary search in O(log nCand) without walking it. Returns 0
 * when a case outside the window is exactly as near as the window's farthest one: the k nearest
 * are then not one set, and nearestWithRandomTies settles the tie at random.
 * The set is the one nearestWithRandomTies takes whenever it has no choice to make (distances are
 * the same floating-point differences, and they are monotone in the position on each side).
 */
export function nearestWindow(x: number, cP: Float64Array, nCand: number, k: number): number {
  // Smallest a whose window is at least as near as the next one: x − cP[a] ≤ cP[a + k] − x.
  // The condition is false → true as a grows (left distances shrink, right ones grow).
  let lo = 1;
  let hi = nCand - k + 1;
  while (lo < hi) {
    const mid = (lo + hi) >>> 1;
    if (x - cP[mid] > cP[mid + k] - x) lo = mid + 1;
    else hi = mid;
  }
  const dl = x - cP[lo];
  const dr = cP[lo + k - 1] - x;
  const far = dl > dr ? dl : dr;
  return x - cP[lo - 1] === far || cP[lo + k] - x === far ? 0 : lo;
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
