// Gradient boosting checked against Debian python3-xgboost 1.7.4 (tree_method='hist', nthread=1):
// fixture test/fixtures/xgboost-small/reference.json, made by make.py beside it (see its docstring
// for why the trees must agree: few distinct integer feature values, so both binnings give one bin
// per value and see the same candidate splits).
import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import { trainGradientBoosting, predictTrees } from '../../../src/models/trees/index.ts';

interface Config {
  name: string;
  max_depth: number;
  eta: number;
  lambda: number;
  gamma: number;
  min_child_weight: number;
  rounds: number;
  predictions: number[];
  predictionsFirstTree: number[];
  leavesPerTree: number[];
  rootFeaturePerTree: number[];
}
const ref = JSON.parse(
  readFileSync(new URL('../../fixtures/xgboost-small/reference.json', import.meta.url), 'utf8'),
) as { xgboost: string; max_bin: number; base_score: number; x: number[][]; y: number[]; configs: Config[] };

const nRows = ref.x.length;
const nFeatures = ref.x[0].length;
const x = Float32Array.from(ref.x.flat());
const y = Float64Array.from(ref.y);

describe(`gradient boosting vs xgboost ${ref.xgboost} hist`, () => {
  it('the fixture was made by the expected reference', () => {
    expect(ref.xgboost).toBe('1.7.4');
  });

  for (const c of ref.configs) {
    it(`${c.name}: same trees and predictions (max_depth ${c.max_depth}, eta ${c.eta}, lambda ${c.lambda}, gamma ${c.gamma}, min_child_weight ${c.min_child_weight})`, () => {
      const model = trainGradientBoosting(
        { x, nRows, nFeatures, y },
        {
          nRounds: c.rounds,
          maxDepth: c.max_depth,
          learningRate: c.eta,
          lambda: c.lambda,
          gamma: c.gamma,
          minChildWeight: c.min_child_weight,
          maxBins: ref.max_bin,
          baseScore: ref.base_score,
          patience: 0,
        },
        1,
      );
      // Structure: leaves and root split feature of every tree as in xgboost's JSON dump.
      expect(model.trees.map((t) => t.feature.filter((f) => f < 0).length)).toEqual(c.leavesPerTree);
      expect(model.trees.map((t) => t.feature[0])).toEqual(c.rootFeaturePerTree);

      // Predictions: xgboost keeps gradients and sums in float32, we keep gradients in float64,
      // so leaf values differ in the last bits only; 1e-5 absolute on targets of order 1.
      const p = predictTrees(model, x, nRows);
      for (let i = 0; i < nRows; i++) expect(Math.abs(p[i] - c.predictions[i])).toBeLessThan(1e-5);
      const first = predictTrees({ ...model, trees: model.trees.slice(0, 1) }, x, nRows);
      for (let i = 0; i < nRows; i++) expect(Math.abs(first[i] - c.predictionsFirstTree[i])).toBeLessThan(1e-6);
    });
  }
});
