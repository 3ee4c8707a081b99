// In-process prediction with the same arithmetic as onnxruntime's TreeEnsembleRegressor
// (float thresholds, SUM aggregation): per row, leaf values are added in tree order in float32
// starting from 0, then the base score is added in float32. Comparisons are x <= threshold on
// float32 values; NaN follows missingLeft. The result is bitwise what onnxruntime returns.

import type { TreeModel } from './types.ts';

export function predictTrees(model: TreeModel, x: Float32Array, nRows: number): Float32Array {
  const nF = model.nFeatures;
  if (x.length !== nRows * nF) {
    throw new RangeError(`x has ${x.length} values, expected nRows × nFeatures = ${nRows * nF}`);
  }
  const out = new Float32Array(nRows);
  const nT = model.trees.length;
  // Flatten to typed arrays once: node i of tree t sits at offset[t] + i.
  const offset = new Int32Array(nT);
  let total = 0;
  for (let t = 0; t < nT; t++) {
    offset[t] = total;
    total += model.trees[t].feature.length;
  }
  const feature = new Int32Array(total);
  const threshold = new Float32Array(total);
  const left = new Int32Array(total);
  const right = new Int32Array(total);
  const missingLeft = new Uint8Array(total);
  const value = new Float32Array(total);
  for (let t = 0; t < nT; t++) {
    const tr = model.trees[t];
    const o = offset[t];
    for (let i = 0; i < tr.feature.length; i++) {
      feature[o + i] = tr.feature[i];
      threshold[o + i] = tr.threshold[i];
      left[o + i] = o + tr.left[i];
      right[o + i] = o + tr.right[i];
      missingLeft[o + i] = tr.missingLeft[i];
      value[o + i] = tr.value[i];
    }
  }
  const base = Math.fround(model.baseScore);
  for (let r = 0, xo = 0; r < nRows; r++, xo += nF) {
    let s = 0;
    for (let t = 0; t < nT; t++) {
      let i = offset[t];
      while (feature[i] >= 0) {
        const v = x[xo + feature[i]];
        i = v <= threshold[i] || (v !== v && missingLeft[i] === 1) ? left[i] : right[i];
      }
      s = Math.fround(s + value[i]);
    }
    out[r] = Math.fround(s + base);
  }
  return out;
}
