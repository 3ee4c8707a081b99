import { describe, expect, it } from 'vitest';
import { trainRandomForest, predictTrees } from '../../../src/models/trees/index.ts';
import { sinSquare, rmse } from './synthetic.ts';

const SD = 0.1;

describe('trainRandomForest', () => {
  const train = sinSquare(4000, SD, 1);
  const test = sinSquare(2000, SD, 3);

  it('learns y = sin(x0) + 0.5·x1² + noise close to the noise level', () => {
    const model = trainRandomForest(train, { nTrees: 100, maxDepth: 14, mtry: 2, minLeafRows: 3 }, 5);
    expect(model.trees.length).toBe(100);
    expect(model.baseScore).toBe(0);
    const err = rmse(predictTrees(model, test.x, test.nRows), test.y);
    // Noise sd is the floor (by construction); a forest is less sharp than boosting on smooth
    // functions, so 1.4 × sd is our tolerance (common practice).
    expect(err).toBeLessThan(1.4 * SD);
    expect(err).toBeGreaterThan(0.9 * SD);
  });

  it('leaf = mean of y over the rows reaching it (constant y per side gives the exact side value)', () => {
    // One binary feature; y = 3 where x = 0 and −1 where x = 1. Every bootstrap tree splits once
    // and each leaf is the mean of a constant, so the forest returns 3 and −1 up to float32 sums.
    const n = 200;
    const x = Float32Array.from({ length: n }, (_, i) => i % 2);
    const y = Float64Array.from(x, (v) => (v === 0 ? 3 : -1));
    const model = trainRandomForest({ x, nRows: n, nFeatures: 1, y }, { nTrees: 50, maxDepth: 4, minLeafRows: 1 }, 1);
    for (const t of model.trees) expect(t.feature.filter((f) => f >= 0).length).toBe(1);
    const p = predictTrees(model, Float32Array.of(0, 1), 2);
    expect(p[0]).toBeCloseTo(3, 5);
    expect(p[1]).toBeCloseTo(-1, 5);
  });

  it('draws mtry features per split (default floor(p/3)) and is fixed by the seed', () => {
    const a = trainRandomForest(train, { nTrees: 20, maxDepth: 6 }, 9);
    const b = trainRandomForest(train, { nTrees: 20, maxDepth: 6 }, 9);
    expect(a.info.params.mtry).toBe(1);
    expect(JSON.stringify(a)).toBe(JSON.stringify(b));
    // With one random feature per split, the noise features x2, x3 get used somewhere.
    const used = new Set(a.trees.flatMap((t) => t.feature.filter((f) => f >= 0)));
    expect(used.has(2) || used.has(3)).toBe(true);
  });

  it('keeps leaves above minLeafRows (bootstrap repeats counted)', () => {
    const model = trainRandomForest(train, { nTrees: 10, maxDepth: 20, minLeafRows: 25, mtry: 4 }, 2);
    for (const t of model.trees) {
      t.feature.forEach((f, i) => { if (f < 0) expect(t.cover[i]).toBeGreaterThanOrEqual(25); });
    }
  });

  it('refuses mtry above the number of features', () => {
    expect(() => trainRandomForest(train, { mtry: 5 }, 1)).toThrow(/mtry/);
  });
});
