// The histogram work of growing a tree, as plain functions over a range of the tree's features,
// so the grower (src/models/trees/grow-tree.ts) and its helper thread (hist-helper.ts) run the
// same code on their halves. A feature's histogram is summed over the rows in the same order
// whichever thread builds it, so a tree grown on two threads equals the one grown on one.
import { MISSING_CODE } from './quantile-bins.ts';

export const SLOTS = 512; // 256 codes × (g, h)
/** Relative guard against splits whose gain is floating-point noise. */
export const REL_EPS = 1e-10;

/** What the histograms are built from: shared between the threads when the grower has a helper. */
export interface HistData {
  codes: Uint8Array;
  nRows: number;
  rows: Int32Array;
  g: Float64Array;
  h: Float64Array;
  /** Bins per feature (cuts + 1). */
  nBins: Int32Array;
}

/** Histograms of positions [b, e) of `rows` for features feats[j0 … j1−1] (only those slots are written). */
export function buildHistRange(d: HistData, unit: boolean, hist: Float64Array, feats: Int32Array, j0: number, j1: number, b: number, e: number): void {
  const { codes, nRows, rows, g, h } = d;
  let j = j0;
  // Eight features per pass over the rows: the row id and its (g, h) are loaded once for eight
  // histogram updates; each feature's 4 KB of histogram stays in L1.
  for (; j + 8 <= j1; j += 8) {
    const b0 = feats[j + 0] * SLOTS;
    const o0 = feats[j + 0] * nRows;
    hist.fill(0, b0, b0 + SLOTS);
    const b1 = feats[j + 1] * SLOTS;
    const o1 = feats[j + 1] * nRows;
    hist.fill(0, b1, b1 + SLOTS);
    const b2 = feats[j + 2] * SLOTS;
    const o2 = feats[j + 2] * nRows;
    hist.fill(0, b2, b2 + SLOTS);
    const b3 = feats[j + 3] * SLOTS;
    const o3 = feats[j + 3] * nRows;
    hist.fill(0, b3, b3 + SLOTS);
    const b4 = feats[j + 4] * SLOTS;
    const o4 = feats[j + 4] * nRows;
    hist.fill(0, b4, b4 + SLOTS);
    const b5 = feats[j + 5] * SLOTS;
    const o5 = feats[j + 5] * nRows;
    hist.fill(0, b5, b5 + SLOTS);
    const b6 = feats[j + 6] * SLOTS;
    const o6 = feats[j + 6] * nRows;
    hist.fill(0, b6, b6 + SLOTS);
    const b7 = feats[j + 7] * SLOTS;
    const o7 = feats[j + 7] * nRows;
    hist.fill(0, b7, b7 + SLOTS);
    for (let i = b; i < e; i++) {
      const r = rows[i];
      const gi = g[r];
      const hi = unit ? 1 : h[r];
      let k = 0;
      k = b0 + (codes[o0 + r] << 1);
      hist[k] += gi;
      hist[k + 1] += hi;
      k = b1 + (codes[o1 + r] << 1);
      hist[k] += gi;
      hist[k + 1] += hi;
      k = b2 + (codes[o2 + r] << 1);
      hist[k] += gi;
      hist[k + 1] += hi;
      k = b3 + (codes[o3 + r] << 1);
      hist[k] += gi;
      hist[k + 1] += hi;
      k = b4 + (codes[o4 + r] << 1);
      hist[k] += gi;
      hist[k + 1] += hi;
      k = b5 + (codes[o5 + r] << 1);
      hist[k] += gi;
      hist[k + 1] += hi;
      k = b6 + (codes[o6 + r] << 1);
      hist[k] += gi;
      hist[k + 1] += hi;
      k = b7 + (codes[o7 + r] << 1);
      hist[k] += gi;
      hist[k + 1] += hi;
    }
  }
  for (; j + 4 <= j1; j += 4) {
    const b0 = feats[j] * SLOTS;
    const b1 = feats[j + 1] * SLOTS;
    const b2 = feats[j + 2] * SLOTS;
    const b3 = feats[j + 3] * SLOTS;
    const o0 = feats[j] * nRows;
    const o1 = feats[j + 1] * nRows;
    const o2 = feats[j + 2] * nRows;
    const o3 = feats[j + 3] * nRows;
    hist.fill(0, b0, b0 + SLOTS);
    hist.fill(0, b1, b1 + SLOTS);
    hist.fill(0, b2, b2 + SLOTS);
    hist.fill(0, b3, b3 + SLOTS);
    for (let i = b; i < e; i++) {
      const r = rows[i];
      const gi = g[r];
      const hi = unit ? 1 : h[r];
      let k = b0 + (codes[o0 + r] << 1);
      hist[k] += gi;
      hist[k + 1] += hi;
      k = b1 + (codes[o1 + r] << 1);
      hist[k] += gi;
      hist[k + 1] += hi;
      k = b2 + (codes[o2 + r] << 1);
      hist[k] += gi;
      hist[k + 1] += hi;
      k = b3 + (codes[o3 + r] << 1);
      hist[k] += gi;
      hist[k + 1] += hi;
    }
  }
  for (; j < j1; j++) {
    const base = feats[j] * SLOTS;
    const o = feats[j] * nRows;
    hist.fill(0, base, base + SLOTS);
    for (let i = b; i < e; i++) {
      const r = rows[i];
      const k = base + (codes[o + r] << 1);
      hist[k] += g[r];
      hist[k + 1] += unit ? 1 : h[r];
    }
  }
}

/** hist −= small over features feats[j0 … j1−1]: turns the parent's histogram into the larger child's. */
export function subtractHistRange(nBins: Int32Array, hist: Float64Array, small: Float64Array, feats: Int32Array, j0: number, j1: number): void {
  for (let j = j0; j < j1; j++) {
    const base = feats[j] * SLOTS;
    const nb = nBins[feats[j]];
    for (let k = base, end = base + 2 * nb; k < end; k++) hist[k] -= small[k];
    const m = base + 2 * MISSING_CODE;
    hist[m] -= small[m];
    hist[m + 1] -= small[m + 1];
  }
}

/** Best split found by findSplitRange: score = GL²/(HL+λ) + GR²/(HR+λ); f = −1 when none beats the start. */
export const SPLIT_SCORE = 0;
export const SPLIT_FEATURE = 1;
export const SPLIT_BIN = 2;
export const SPLIT_MISSING_LEFT = 3;
export const SPLIT_GL = 4;
export const SPLIT_HL = 5;
export const SPLIT_FIELDS = 6;

/**
 * Scans features feats[j0 … j1−1] for the split with the highest score above `start`, bins left
 * to right with missing values sent right, and again with them sent left when the node has any;
 * the first of equal scores wins (so two ranges scanned apart and combined by "the later range
 * only when strictly higher" give the same split as one scan). Writes into out[0 … SPLIT_FIELDS).
 */
export function findSplitRange(
  nBins: Int32Array,
  hist: Float64Array,
  feats: Int32Array,
  j0: number,
  j1: number,
  G: number,
  H: number,
  lambda: number,
  mcw: number,
  start: number,
  out: Float64Array,
): void {
  let bestScore = start;
  let bf = -1;
  let bb = 0;
  let bml = 0;
  let bgl = 0;
  let bhl = 0;
  for (let j = j0; j < j1; j++) {
    const f = feats[j];
    const nb = nBins[f];
    if (nb < 2) continue;
    const base = f * SLOTS;
    const gm = hist[base + 2 * MISSING_CODE];
    const hm = hist[base + 2 * MISSING_CODE + 1];
    const hasMissing = hm > 0;
    let gl = 0;
    let hl = 0;
    for (let bin = 0, k = base; bin < nb - 1; bin++, k += 2) {
      const hb = hist[k + 1];
      if (hb === 0) continue; // empty bin: same partition as the previous candidate
      gl += hist[k];
      hl += hb;
      // Missing values to the right.
      let hr = H - hl;
      if (hl >= mcw && hr >= mcw && hl > 0 && hr > 0) {
        const gr = G - gl;
        const s = (gl * gl) / (hl + lambda) + (gr * gr) / (hr + lambda);
        if (s > bestScore) {
          bestScore = s;
          bf = f; bb = bin; bml = 0; bgl = gl; bhl = hl;
        }
      }
      if (hasMissing) {
        const gl2 = gl + gm;
        const hl2 = hl + hm;
        hr = H - hl2;
        if (hl2 >= mcw && hr >= mcw && hr > 0) {
          const gr = G - gl2;
          const s = (gl2 * gl2) / (hl2 + lambda) + (gr * gr) / (hr + lambda);
          if (s > bestScore) {
            bestScore = s;
            bf = f; bb = bin; bml = 1; bgl = gl2; bhl = hl2;
          }
        }
      }
    }
  }
  out[SPLIT_SCORE] = bestScore;
  out[SPLIT_FEATURE] = bf;
  out[SPLIT_BIN] = bb;
  out[SPLIT_MISSING_LEFT] = bml;
  out[SPLIT_GL] = bgl;
  out[SPLIT_HL] = bhl;
}
