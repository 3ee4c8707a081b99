// Random forest for regression (Breiman 2001) on the boosting tree code: every tree sees a
// bootstrap sample (rows drawn with replacement, repeats as weights w) and a fresh random subset of
// mtry features at every split. With g = −w·y, h = w and λ = 0 the boosting gain is the drop in
// squared error and the leaf −G/H is the weighted mean of y. Leaf values are stored already divided
// by the number of trees, so the model is a plain SUM ensemble (base score 0), like boosting.

import type { RandomForestParams, TrainingData, TreeModel, Tree } from './types.ts';
import { computeCuts, binFeatures } from './quantile-bins.ts';
import { TreeGrower } from './grow-tree.ts';
import { createPrng } from '../../core/prng.ts';
import { checkTrainingData, checkParam } from './check-data.ts';
import { toStoredTree, addTreeOnFeatures } from './tree-convert.ts';

export const defaultRandomForestParams: Readonly<RandomForestParams> = Object.freeze({
  nTrees: 200,
  maxDepth: 12,
  mtry: 0,
  minLeafRows: 5, // regression default node size of Breiman & Cutler's code (common practice)
  sampleFraction: 1,
  maxBins: 255,
});

function checkParams(p: RandomForestParams, nFeatures: number): void {
  checkParam('nTrees', p.nTrees, 1, 1e6, true);
  checkParam('maxDepth', p.maxDepth, 0, 40, true);
  checkParam('mtry', p.mtry, 0, nFeatures, true);
  checkParam('minLeafRows', p.minLeafRows, 1, Infinity);
  checkParam('sampleFraction', p.sampleFraction, Number.MIN_VALUE, 1);
  checkParam('maxBins', p.maxBins, 2, 255, true);
}

function rmse(pred: Float64Array, y: ArrayLike<number>): number {
  let s = 0;
  for (let i = 0; i < y.length; i++) s += (pred[i] - y[i]) ** 2;
  return Math.sqrt(s / y.length);
}

export function trainRandomForest(
  data: TrainingData,
  params: Partial<RandomForestParams>,
  seed: number,
  onProgress?: (done: number, total: number) => void,
  shouldStop?: () => boolean,
): TreeModel {
  const p: RandomForestParams = { ...defaultRandomForestParams, ...params };
  checkTrainingData(data);
  checkParams(p, data.nFeatures);
  const { x, nRows, nFeatures, y, valid } = data;
  const rng = createPrng(seed);
  const mtry = p.mtry > 0 ? p.mtry : Math.max(1, Math.floor(nFeatures / 3));
  const binned = binFeatures(x, nRows, nFeatures, computeCuts(x, nRows, nFeatures, p.maxBins));
  const grower = new TreeGrower(binned);
  const { rows, g, h } = grower;
  const counts = new Int32Array(nRows);
  const allFeatures = Int32Array.from({ length: nFeatures }, (_, i) => i);
  const nDraw = Math.max(1, Math.round(p.sampleFraction * nRows));
  const trees: Tree[] = [];
  let cancelled = false;

  for (let t = 0; t < p.nTrees; t++) {
    if (shouldStop?.()) {
      cancelled = true;
      break;
    }
    counts.fill(0);
    for (let k = 0; k < nDraw; k++) counts[rng.nextInt(nRows)]++;
    let nUsed = 0;
    for (let r = 0; r < nRows; r++) {
      const w = counts[r];
      if (w === 0) continue;
      rows[nUsed++] = r;
      g[r] = -w * y[r];
      h[r] = w;
    }
    const work = grower.grow(nUsed, {
      maxDepth: p.maxDepth,
      lambda: 0,
      gamma: 0,
      minChildWeight: p.minLeafRows,
      leafScale: 1 / p.nTrees,
      treeFeatures: allFeatures,
      mtry,
      unitHessian: false,
      rng,
    });
    trees.push(toStoredTree(work, binned.cuts));
    onProgress?.(t + 1, p.nTrees);
  }

  // A cancelled forest is rescaled so that its leaves still average over the trees it has.
  if (cancelled && trees.length > 0) {
    const k = p.nTrees / trees.length;
    for (const tr of trees) {
      for (let i = 0; i < tr.value.length; i++) tr.value[i] = Math.fround(tr.value[i] * k);
    }
  }

  const trainPred = new Float64Array(nRows);
  for (const tr of trees) addTreeOnFeatures(tr, x, nRows, nFeatures, trainPred);
  const validRmse: number[] = [];
  if (valid) {
    const vp = new Float64Array(valid.nRows);
    for (const tr of trees) addTreeOnFeatures(tr, valid.x, valid.nRows, nFeatures, vp);
    validRmse.push(rmse(vp, valid.y));
  }
  return {
    format: 'tree-ensemble/1',
    kind: 'random-forest',
    nFeatures,
    baseScore: 0,
    trees,
    info: {
      seed,
      params: { ...p, mtry },
      roundsTrained: trees.length,
      bestIteration: -1,
      stopReason: cancelled ? 'cancelled' : 'rounds',
      validRmse,
      trainRmse: rmse(trainPred, y),
    },
  };
}
