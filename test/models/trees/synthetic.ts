// Seeded synthetic regression data for the tree tests (invented data: tests only).
import { createPrng } from '../../../src/core/prng.ts';

export interface Synthetic {
  x: Float32Array;
  y: Float64Array;
  nRows: number;
  nFeatures: number;
}

/**
 * y = sin(x0) + 0.5·x1² + N(0, sd²), x_j ~ U(−2, 2) for 4 features (x2, x3 carry no signal).
 * missingShare > 0 blanks that share of x3 (NaN) and adds 1 to y for those rows, so the trees
 * have something to learn from where missing values go.
 */
export function sinSquare(nRows: number, sd: number, seed: number, missingShare = 0): Synthetic {
  const nFeatures = 4;
  const rng = createPrng(seed);
  const x = new Float32Array(nRows * nFeatures);
  const y = new Float64Array(nRows);
  for (let r = 0; r < nRows; r++) {
    for (let f = 0; f < nFeatures; f++) x[r * nFeatures + f] = 4 * rng.nextFloat() - 2;
    let v = Math.sin(x[r * nFeatures]) + 0.5 * x[r * nFeatures + 1] ** 2 + sd * rng.normal();
    if (missingShare > 0 && rng.nextFloat() < missingShare) {
      x[r * nFeatures + 3] = NaN;
      v += 1;
    }
    y[r] = v;
  }
  return { x, y, nRows, nFeatures };
}

export function rmse(pred: ArrayLike<number>, y: ArrayLike<number>): number {
  let s = 0;
  for (let i = 0; i < y.length; i++) s += (pred[i] - y[i]) ** 2;
  return Math.sqrt(s / y.length);
}
