// Gradient-boosted regression trees, squared error: g = prediction − y, h = 1 per row.
// Each round draws rows (Bernoulli, rowSample) and features (colSample) afresh, grows one tree on
// the histograms of the pre-binned features and adds learningRate × leaf to the predictions.
// With validation rows and patience > 0, training stops after `patience` rounds without a lower
// validation RMSE and the model keeps the trees up to the best round.

import type { GradientBoostingParams, TrainingData, TreeModel, StopReason, Tree } from './types.ts';
import { computeCuts, binFeatures } from './quantile-bins.ts';
import { TreeGrower } from './grow-tree.ts';
import { createPrng, type Prng } from '../../core/prng.ts';
import { checkTrainingData, checkParam } from './check-data.ts';
import { toStoredTree, addLeafValuesByRange, addTreeOnCodes, addTreeOnFeatures } from './tree-convert.ts';

export const defaultGradientBoostingParams: Readonly<GradientBoostingParams> = Object.freeze({
  nRounds: 300,
  learningRate: 0.1,
  maxDepth: 6,
  lambda: 1,
  gamma: 0,
  minChildWeight: 1,
  rowSample: 1,
  colSample: 1,
  maxBins: 255,
  patience: 20,
});

function checkParams(p: GradientBoostingParams): void {
  checkParam('nRounds', p.nRounds, 1, 1e6, true);
  checkParam('learningRate', p.learningRate, Number.MIN_VALUE, 1);
  checkParam('maxDepth', p.maxDepth, 0, 30, true);
  checkParam('lambda', p.lambda, 0, Infinity);
  checkParam('gamma', p.gamma, 0, Infinity);
  checkParam('minChildWeight', p.minChildWeight, 0, Infinity);
  checkParam('rowSample', p.rowSample, Number.MIN_VALUE, 1);
  checkParam('colSample', p.colSample, Number.MIN_VALUE, 1);
  checkParam('maxBins', p.maxBins, 2, 255, true);
  checkParam('patience', p.patience, 0, 1e6, true);
  if (p.baseScore !== undefined && !Number.isNaN(p.baseScore) && !Number.isFinite(p.baseScore)) {
    throw new RangeError('baseScore must be finite (or NaN/undefined for the mean of y)');
  }
}

/** Draws k of n features without replacement, returned in ascending order. */
export function drawFeatures(n: number, k: number, rng: Prng, buf: Int32Array): Int32Array {
  for (let i = 0; i < n; i++) buf[i] = i;
  if (k >= n) return buf.slice(0, n);
  for (let j = 0; j < k; j++) {
    const m = j + rng.nextInt(n - j);
    const t = buf[j];
    buf[j] = buf[m];
    buf[m] = t;
  }
  return buf.slice(0, k).sort();
}

/**
 * Trees grow on one thread unless asked for two. The helper thread shares the histogram work, but on
 * a quiet 2-core machine it made the fit slower, not faster: bench/fit.ts (80,000 rows × 40
 * features, 300 trees) took 8.0 s on one thread and 10.1 s on two, at load 1.1–1.2.
 */
export const DEFAULT_TREE_THREADS = 1;

function rmse(pred: Float64Array, y: ArrayLike<number>): number {
  let s = 0;
  for (let i = 0; i < y.length; i++) {
    const d = pred[i] - y[i];
    s += d * d;
  }
  return Math.sqrt(s / y.length);
}

export function trainGradientBoosting(
  data: TrainingData,
  params: Partial<GradientBoostingParams>,
  seed: number,
  onProgress?: (done: number, total: number) => void,
  shouldStop?: () => boolean,
  /** 1 or 2; the trees are the same either way (default: defaultTreeThreads). */
  threads?: number,
): TreeModel {
  const p: GradientBoostingParams = { ...defaultGradientBoostingParams, ...params };
  checkParams(p);
  checkTrainingData(data);
  const { x, nRows, nFeatures, y, valid } = data;
  const rng = createPrng(seed);

  let mean = 0;
  for (let i = 0; i < nRows; i++) mean += y[i];
  mean /= nRows;
  const baseScore = Math.fround(p.baseScore === undefined || Number.isNaN(p.baseScore) ? mean : p.baseScore);

  const binned = binFeatures(x, nRows, nFeatures, computeCuts(x, nRows, nFeatures, p.maxBins));
  const grower = new TreeGrower(binned, threads ?? DEFAULT_TREE_THREADS, p.maxDepth + 2);
  try {
    return boost(data, p, seed, rng, baseScore, binned, grower, onProgress, shouldStop);
  } finally {
    grower.close();
  }
}

function boost(
  data: TrainingData,
  p: GradientBoostingParams,
  seed: number,
  rng: Prng,
  baseScore: number,
  binned: ReturnType<typeof binFeatures>,
  grower: TreeGrower,
  onProgress?: (done: number, total: number) => void,
  shouldStop?: () => boolean,
): TreeModel {
  const { nRows, nFeatures, y, valid } = data;
  const { rows, g, h } = grower;
  h.fill(1); // squared error: unit hessian for every row

  const pred = new Float64Array(nRows).fill(baseScore);
  const validPred = valid ? new Float64Array(valid.nRows).fill(baseScore) : null;
  const validRmse: number[] = [];
  const trainRmse: number[] = [];
  const trees: Tree[] = [];
  const featBuf = new Int32Array(nFeatures);
  const nColumns = Math.max(1, Math.round(p.colSample * nFeatures));
  const useEarlyStop = validPred !== null && p.patience > 0;
  let best = -1;
  let bestScore = Infinity;
  let stopReason: StopReason = 'rounds';

  for (let round = 0; round < p.nRounds; round++) {
    if (shouldStop?.()) {
      stopReason = 'cancelled';
      break;
    }
    // Rows for this tree first, the others after them (their predictions are updated by walking the tree).
    let nUsed = 0;
    if (p.rowSample >= 1) {
      for (let r = 0; r < nRows; r++) rows[r] = r;
      nUsed = nRows;
    } else {
      let back = nRows;
      for (let r = 0; r < nRows; r++) {
        if (rng.nextFloat() < p.rowSample) rows[nUsed++] = r;
        else rows[--back] = r;
      }
    }
    for (let i = 0; i < nUsed; i++) {
      const r = rows[i];
      g[r] = pred[r] - y[r];
    }
    const treeFeatures = drawFeatures(nFeatures, nColumns, rng, featBuf);
    const work = grower.grow(nUsed, {
      maxDepth: p.maxDepth,
      lambda: p.lambda,
      gamma: p.gamma,
      minChildWeight: p.minChildWeight,
      leafScale: p.learningRate,
      treeFeatures,
      mtry: 0,
      unitHessian: true,
      rng,
    });
    addLeafValuesByRange(work, rows, pred);
    if (nUsed < nRows) addTreeOnCodes(work, binned.codes, nRows, rows, nUsed, nRows, pred);
    const tree = toStoredTree(work, binned.cuts);
    trees.push(tree);
    trainRmse.push(rmse(pred, y));

    if (valid && validPred) {
      addTreeOnFeatures(tree, valid.x, valid.nRows, nFeatures, validPred);
      const score = rmse(validPred, valid.y);
      validRmse.push(score);
      if (score < bestScore) {
        bestScore = score;
        best = round;
      } else if (useEarlyStop && round - best >= p.patience) {
        stopReason = 'early-stopping';
        onProgress?.(round + 1, p.nRounds);
        break;
      }
    }
    onProgress?.(round + 1, p.nRounds);
  }

  const roundsTrained = trees.length;
  const keep = useEarlyStop && best >= 0 ? best + 1 : roundsTrained;
  trees.length = keep;
  const params01: Record<string, number> = { ...p, baseScore };
  return {
    format: 'tree-ensemble/1',
    kind: 'gradient-boosting',
    nFeatures,
    baseScore,
    trees,
    info: {
      seed,
      params: params01,
      roundsTrained,
      bestIteration: validPred ? best : -1,
      stopReason,
      validRmse,
      trainRmse: keep > 0 ? trainRmse[keep - 1] : rmse(new Float64Array(nRows).fill(baseScore), y),
    },
  };
}
