// Public surface of the tree trainers.
export type {
  TreeModel,
  Tree,
  TrainingData,
  FeatureMatrix,
  GradientBoostingParams,
  RandomForestParams,
  StopReason,
} from './types.ts';
export { trainGradientBoosting, defaultGradientBoostingParams } from './gradient-boosting.ts';
export { trainRandomForest, defaultRandomForestParams } from './random-forest.ts';
export { predictTrees } from './predict.ts';
