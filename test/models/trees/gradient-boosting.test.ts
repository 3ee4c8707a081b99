import { describe, expect, it } from 'vitest';
import { trainGradientBoosting, predictTrees } from '../../../src/models/trees/index.ts';
import { createPrng } from '../../../src/core/prng.ts';
import { sinSquare, rmse } from './synthetic.ts';

const SD = 0.1;

describe('trainGradientBoosting', () => {
  const train = sinSquare(4000, SD, 1);
  const valid = sinSquare(1000, SD, 2);
  const test = sinSquare(2000, SD, 3);

  it('learns y = sin(x0) + 0.5·x1² + noise down to about the noise level', () => {
    const model = trainGradientBoosting(
      { ...train, valid },
      { nRounds: 400, learningRate: 0.1, maxDepth: 4, patience: 20 },
      7,
    );
    const err = rmse(predictTrees(model, test.x, test.nRows), test.y);
    // The noise sd is the lowest RMSE any model can reach on fresh rows (by construction);
    // within 20 % of it is our tolerance (common practice), and clearly below it would mean leakage.
    expect(err).toBeLessThan(1.2 * SD);
    expect(err).toBeGreaterThan(0.9 * SD);
    // The untouched features x2, x3 are never the most useful: total gain sits on x0 and x1.
    const gain = [0, 0, 0, 0];
    for (const t of model.trees) t.feature.forEach((f, i) => { if (f >= 0) gain[f] += t.gain[i]; });
    expect(gain[0] + gain[1]).toBeGreaterThan(0.95 * (gain[0] + gain[1] + gain[2] + gain[3]));
  });

  it('learns with row and column subsampling too, and the seed fixes the result', () => {
    const params = { nRounds: 150, learningRate: 0.15, maxDepth: 5, rowSample: 0.7, colSample: 0.75, patience: 0 };
    const a = trainGradientBoosting(train, params, 11);
    const b = trainGradientBoosting(train, params, 11);
    const c = trainGradientBoosting(train, params, 12);
    expect(JSON.stringify(a)).toBe(JSON.stringify(b));
    expect(JSON.stringify(a.trees)).not.toBe(JSON.stringify(c.trees));
    expect(rmse(predictTrees(a, test.x, test.nRows), test.y)).toBeLessThan(1.3 * SD);
  });

  it('reports a training RMSE that matches its own float32 predictions', () => {
    const model = trainGradientBoosting(train, { nRounds: 50, maxDepth: 3 }, 1);
    expect(model.info.trainRmse).toBeCloseTo(rmse(predictTrees(model, train.x, train.nRows), train.y), 5);
  });

  it('stops early on a target with nothing to learn and keeps the best round', () => {
    const rng = createPrng(5);
    const noise = (n: number): Float64Array => Float64Array.from({ length: n }, () => rng.normal());
    const tr = { ...train, y: noise(train.nRows) };
    const va = { ...valid, y: noise(valid.nRows) };
    const patience = 5;
    const model = trainGradientBoosting({ ...tr, valid: va }, { nRounds: 500, learningRate: 0.3, maxDepth: 4, patience }, 3);
    const { bestIteration, roundsTrained, validRmse, stopReason } = model.info;
    expect(stopReason).toBe('early-stopping');
    expect(roundsTrained).toBeLessThan(500);
    expect(roundsTrained).toBe(bestIteration + 1 + patience);
    expect(model.trees.length).toBe(bestIteration + 1);
    expect(validRmse[bestIteration]).toBe(Math.min(...validRmse));
    // The kept model scores what was recorded for the best round (float32 vs float64 sums).
    expect(rmse(predictTrees(model, va.x, va.nRows), va.y)).toBeCloseTo(validRmse[bestIteration], 5);
  });

  it('learns where missing values go (x3 = NaN adds 1 to y)', () => {
    const tr = sinSquare(4000, SD, 21, 0.3);
    const te = sinSquare(2000, SD, 22, 0.3);
    const model = trainGradientBoosting(tr, { nRounds: 300, maxDepth: 4, patience: 0 }, 1);
    expect(rmse(predictTrees(model, te.x, te.nRows), te.y)).toBeLessThan(1.3 * SD);
    // Same rows with x3 blanked vs set to 0: the learned default direction must carry the +1.
    const probe = te.x.slice(0, 400 * 4);
    const blank = probe.slice();
    for (let r = 0; r < 400; r++) {
      probe[r * 4 + 3] = 0;
      blank[r * 4 + 3] = NaN;
    }
    const withValue = predictTrees(model, probe, 400);
    const withMissing = predictTrees(model, blank, 400);
    let mean = 0;
    for (let r = 0; r < 400; r++) mean += (withMissing[r] - withValue[r]) / 400;
    // The data add exactly 1 where x3 is missing (by construction); ±15 %: common practice.
    expect(mean).toBeGreaterThan(0.85);
    expect(mean).toBeLessThan(1.15);
  });

  it('with a large gamma makes no split at all: every row gets base score + leaf sum', () => {
    const model = trainGradientBoosting(train, { nRounds: 5, gamma: 1e9, patience: 0 }, 1);
    for (const t of model.trees) expect(t.feature).toEqual([-1]);
    const p = predictTrees(model, test.x, test.nRows);
    expect(new Set(p).size).toBe(1);
  });

  it('reports progress, honours cancellation and survives a JSON round trip', () => {
    const seen: number[] = [];
    let calls = 0;
    const model = trainGradientBoosting(train, { nRounds: 40, patience: 0 }, 1, (done, total) => {
      seen.push(done);
      expect(total).toBe(40);
    }, () => ++calls > 10);
    expect(model.info.stopReason).toBe('cancelled');
    expect(model.trees.length).toBe(10);
    expect(seen).toEqual(Array.from({ length: 10 }, (_, i) => i + 1));
    const copy = JSON.parse(JSON.stringify(model));
    expect(predictTrees(copy, test.x, test.nRows)).toEqual(predictTrees(model, test.x, test.nRows));
  });

  it('refuses bad shapes, non-finite targets and out-of-range parameters', () => {
    expect(() => trainGradientBoosting({ ...train, nRows: 10 }, {}, 1)).toThrow(RangeError);
    const y = train.y.slice();
    y[3] = NaN;
    expect(() => trainGradientBoosting({ ...train, y }, {}, 1)).toThrow(/y\[3\]/);
    expect(() => trainGradientBoosting(train, { maxBins: 256 }, 1)).toThrow(/maxBins/);
    expect(() => trainGradientBoosting(train, { learningRate: 0 }, 1)).toThrow(/learningRate/);
  });
});
