// Features are binned once, before any tree is grown: per feature at most 255 bins cut at quantiles
// of the training values, stored as one uint8 code per value, column by column (codes[f * nRows + r])
// so that building a histogram for one feature streams through one contiguous column.
//
// Bin b holds the values x with cuts[b - 1] < x <= cuts[b] (the last bin is open above), so
// "code <= b" is exactly "x <= cuts[b]": a split on bins is a float32 threshold test with no rounding
// gap between training and prediction. Missing values (NaN) get the reserved code 255.

export const MISSING_CODE = 255;
export const MAX_BINS = 255;

export interface BinnedFeatures {
  nRows: number;
  nFeatures: number;
  /** Column-major codes, codes[f * nRows + r]; MISSING_CODE for NaN. */
  codes: Uint8Array;
  /** Per feature, ascending float32 cut values; bins per feature = cuts.length + 1. */
  cuts: Float32Array[];
}

/**
 * A float32 threshold strictly between two neighbouring distinct values v < w, as near the middle
 * as float32 allows; falls back to v itself (x <= v) when the midpoint rounds up onto w.
 */
function midThreshold(v: number, w: number): number {
  const m = Math.fround(v / 2 + w / 2);
  return m >= w || !Number.isFinite(m) ? v : m;
}

/** First index in sorted[0, n) whose value is > v. */
function upperBound(sorted: Float32Array, n: number, v: number): number {
  let lo = 0;
  let hi = n;
  while (lo < hi) {
    const mid = (lo + hi) >>> 1;
    if (sorted[mid] <= v) lo = mid + 1;
    else hi = mid;
  }
  return lo;
}

/**
 * Quantile cut points per feature from the training rows. With no more distinct values than
 * maxBins every distinct value gets its own bin; otherwise cuts sit after the values at ranks
 * i·n/maxBins (i = 1 … maxBins − 1), ties kept in one bin.
 */
export function computeCuts(
  x: Float32Array,
  nRows: number,
  nFeatures: number,
  maxBins: number,
): Float32Array[] {
  if (!Number.isInteger(maxBins) || maxBins < 2 || maxBins > MAX_BINS) {
    throw new RangeError(`maxBins must be an integer in [2, ${MAX_BINS}], got ${maxBins}`);
  }
  const buf = new Float32Array(nRows);
  const cuts: Float32Array[] = [];
  const out = new Float32Array(maxBins - 1);
  for (let f = 0; f < nFeatures; f++) {
    let n = 0;
    for (let r = 0, k = f; r < nRows; r++, k += nFeatures) {
      const v = x[k];
      if (v === v) buf[n++] = v; // skip NaN
    }
    const sorted = buf.subarray(0, n);
    sorted.sort();
    let nCuts = 0;
    let distinct = n > 0 ? 1 : 0;
    for (let i = 1; i < n && distinct <= maxBins; i++) if (sorted[i] > sorted[i - 1]) distinct++;
    if (distinct <= maxBins) {
      for (let i = 1; i < n; i++) {
        if (sorted[i] > sorted[i - 1]) out[nCuts++] = midThreshold(sorted[i - 1], sorted[i]);
      }
    } else {
      for (let i = 1; i < maxBins; i++) {
        const v = sorted[Math.floor((i * n) / maxBins) - 1];
        const j = upperBound(sorted, n, v);
        if (j >= n) break; // v is the largest value: nothing above to split off
        const c = midThreshold(v, sorted[j]);
        if (nCuts === 0 || c > out[nCuts - 1]) out[nCuts++] = c;
      }
    }
    cuts.push(out.slice(0, nCuts));
  }
  return cuts;
}

/** Bin code of one value: the smallest b with v <= cuts[b], cuts.length if none, 255 if NaN. */
export function binOf(v: number, c: Float32Array): number {
  if (v !== v) return MISSING_CODE;
  let lo = 0;
  let hi = c.length;
  while (lo < hi) {
    const mid = (lo + hi) >>> 1;
    if (v <= c[mid]) hi = mid;
    else lo = mid + 1;
  }
  return lo;
}

/** Codes for all rows of a row-major float32 matrix, column-major out. */
export function binFeatures(
  x: Float32Array,
  nRows: number,
  nFeatures: number,
  cuts: Float32Array[],
): BinnedFeatures {
  const codes = new Uint8Array(nRows * nFeatures);
  for (let f = 0; f < nFeatures; f++) {
    const c = cuts[f];
    const off = f * nRows;
    for (let r = 0, k = f; r < nRows; r++, k += nFeatures) codes[off + r] = binOf(x[k], c);
  }
  return { nRows, nFeatures, codes, cuts };
}
