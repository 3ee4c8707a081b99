import { describe, expect, it } from 'vitest';
import { createPrng } from '../../../src/core/prng.ts';
import { trainGradientBoosting } from '../../../src/models/trees/index.ts';

/** Seeded data with missing values, tied values and a nonlinear signal in a few of the features. */
function data(nRows: number, nFeatures: number, seed: number) {
  const rng = createPrng(seed);
  const x = new Float32Array(nRows * nFeatures);
  const y = new Float64Array(nRows);
  for (let r = 0; r < nRows; r++) {
    for (let f = 0; f < nFeatures; f++) {
      const v = f % 3 === 0 ? Math.round(4 * rng.normal()) : rng.normal();
      x[r * nFeatures + f] = rng.nextFloat() < 0.03 ? NaN : v;
    }
    const a = (f: number) => (Number.isNaN(x[r * nFeatures + f]) ? 0 : x[r * nFeatures + f]);
    y[r] = Math.sin(a(1)) + 0.5 * a(0) * a(2) + (a(4) > 0 ? a(5) : -a(7)) + 0.3 * rng.normal();
  }
  return { x, y };
}

describe('gradient boosting on two threads', () => {
  // Worked by construction, not an outside source: the helper thread builds and scans the second
  // half of the features' histograms, summing each in the same row order, so the trees must be
  // the very same as on one thread for the same data and seed.
  it('grows the same trees as on one thread (row and column sampling, missing values, early stopping)', () => {
    const nRows = 12_000;
    const nF = 13;
    const { x, y } = data(nRows, nF, 5);
    const nTrain = 10_000;
    const train = { x: x.subarray(0, nTrain * nF), nRows: nTrain, nFeatures: nF, y: y.subarray(0, nTrain), valid: { x: x.subarray(nTrain * nF), nRows: nRows - nTrain, y: y.subarray(nTrain) } };
    const params = { nRounds: 40, maxDepth: 7, learningRate: 0.2, rowSample: 0.8, colSample: 0.9, patience: 5, minChildWeight: 2 };
    const one = trainGradientBoosting(train, params, 11, undefined, undefined, 1);
    const two = trainGradientBoosting(train, params, 11, undefined, undefined, 2);
    expect(one.trees.length).toBeGreaterThan(10);
    expect(JSON.stringify(two)).toBe(JSON.stringify(one));
  }, 60_000);
});
