// Turns a grown WorkTree (splits as bin indices) into the stored Tree (float32 thresholds), and
// adds a tree's output to running predictions during training.

import type { Tree } from './types.ts';
import type { WorkTree } from './grow-tree.ts';
import { MISSING_CODE } from './quantile-bins.ts';

export function toStoredTree(w: WorkTree, cuts: Float32Array[]): Tree {
  const n = w.feature.length;
  const threshold = new Array<number>(n);
  for (let i = 0; i < n; i++) {
    const f = w.feature[i];
    // "code <= bin" is exactly "x <= cuts[f][bin]" (see quantile-bins.ts).
    threshold[i] = f >= 0 ? cuts[f][w.bin[i]] : 0;
  }
  return {
    feature: w.feature.slice(),
    threshold,
    left: w.left.slice(),
    right: w.right.slice(),
    missingLeft: w.missingLeft.slice(),
    value: w.value.slice(),
    gain: w.gain.slice(),
    cover: w.cover.slice(),
  };
}

/** out[rows[i]] += leaf value for every training position inside a leaf's range. */
export function addLeafValuesByRange(w: WorkTree, rows: Int32Array, out: Float64Array): void {
  for (let i = 0; i < w.feature.length; i++) {
    if (w.feature[i] >= 0) continue;
    const v = w.value[i];
    for (let p = w.begin[i], e = w.end[i]; p < e; p++) out[rows[p]] += v;
  }
}

/** out[r] += tree(r) for the listed rows, walking the tree on bin codes (column-major). */
export function addTreeOnCodes(
  w: WorkTree,
  codes: Uint8Array,
  nRows: number,
  rows: Int32Array,
  from: number,
  to: number,
  out: Float64Array,
): void {
  const { feature, bin, missingLeft, left, right, value } = w;
  for (let p = from; p < to; p++) {
    const r = rows[p];
    let i = 0;
    while (feature[i] >= 0) {
      const c = codes[feature[i] * nRows + r];
      i = c <= bin[i] || (c === MISSING_CODE && missingLeft[i] === 1) ? left[i] : right[i];
    }
    out[r] += value[i];
  }
}

/** out[r] += tree(x_r) in float64 for all rows of a row-major float32 matrix. */
export function addTreeOnFeatures(
  t: Tree,
  x: Float32Array,
  nRows: number,
  nFeatures: number,
  out: Float64Array,
): void {
  const { feature, threshold, missingLeft, left, right, value } = t;
  for (let r = 0, off = 0; r < nRows; r++, off += nFeatures) {
    let i = 0;
    while (feature[i] >= 0) {
      const v = x[off + feature[i]];
      i = v <= threshold[i] || (v !== v && missingLeft[i] === 1) ? left[i] : right[i];
    }
    out[r] += value[i];
  }
}
