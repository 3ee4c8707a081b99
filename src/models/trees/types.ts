// Shared data shapes of the tree trainers. A TreeModel is plain JSON data (numbers, strings,
// arrays) so it can be stored as-is and exported to ONNX later.

/** Rows × features, row-major float32 (NaN = missing). */
export interface FeatureMatrix {
  x: Float32Array;
  nRows: number;
}

export interface TrainingData extends FeatureMatrix {
  nFeatures: number;
  y: Float64Array | Float32Array;
  /** Held-out rows (same features) used for early stopping and the reported score. */
  valid?: FeatureMatrix & { y: Float64Array | Float32Array };
}

/**
 * One regression tree as parallel arrays indexed by node id (root = 0).
 * Split nodes: go to `left[i]` when x[feature[i]] <= threshold[i] (float32 value), else `right[i]`;
 * a missing value (NaN) goes left when missingLeft[i] === 1, else right.
 * Leaves: feature[i] === -1, value[i] is the leaf output (float32 value, already scaled by the
 * learning rate, or by 1/nTrees for a random forest).
 */
export interface Tree {
  feature: number[];
  threshold: number[];
  left: number[];
  right: number[];
  missingLeft: number[];
  value: number[];
  /** Split gain (0 for leaves) and summed hessian (row weight) per node: for inspection only. */
  gain: number[];
  cover: number[];
}

export type StopReason = 'rounds' | 'early-stopping' | 'cancelled';

export interface TreeModel {
  format: 'tree-ensemble/1';
  kind: 'gradient-boosting' | 'random-forest';
  nFeatures: number;
  /** Prediction = fround(fround-sum of the trees' leaf values in tree order + baseScore). */
  baseScore: number;
  trees: Tree[];
  /** Training record (not needed for prediction). */
  info: {
    seed: number;
    params: Record<string, number>;
    roundsTrained: number;
    /**
     * Round with the lowest validation RMSE (-1 without validation rows). With patience > 0 the
     * model keeps trees 0 … bestIteration only; with patience 0 it keeps every round.
     */
    bestIteration: number;
    stopReason: StopReason;
    /** Validation RMSE after each trained round (empty without validation rows). */
    validRmse: number[];
    trainRmse: number;
  };
}

export interface GradientBoostingParams {
  /** Number of boosting rounds (upper bound when early stopping). */
  nRounds: number;
  /** Shrinkage applied to every leaf value. */
  learningRate: number;
  maxDepth: number;
  /** L2 penalty on leaf values (xgboost's lambda). */
  lambda: number;
  /** Minimum gain for a split to be made (xgboost's gamma, compared like its hist method: un-halved gain). */
  gamma: number;
  /** Minimum summed hessian in each child (rows for squared error). */
  minChildWeight: number;
  /** Fraction of rows drawn (Bernoulli) for each tree. */
  rowSample: number;
  /** Fraction of features drawn for each tree. */
  colSample: number;
  /** Histogram bins per feature, at most 255 (one more code is reserved for missing). */
  maxBins: number;
  /** Rounds without improvement on the validation rows before stopping; 0 = never stop early. */
  patience: number;
  /** Initial prediction; NaN or undefined = mean of y. */
  baseScore?: number;
}

export interface RandomForestParams {
  nTrees: number;
  maxDepth: number;
  /** Features drawn at random for every split; 0 = max(1, floor(nFeatures / 3)). */
  mtry: number;
  /** Minimum rows (counting bootstrap repeats) in each child. */
  minLeafRows: number;
  /** Bootstrap sample size as a fraction of the rows (drawn with replacement). */
  sampleFraction: number;
  maxBins: number;
}
