import { describe, expect, it } from 'vitest';
import fc from 'fast-check';
import { computeCuts, binFeatures, MISSING_CODE } from '../../../src/models/trees/quantile-bins.ts';
import { createPrng } from '../../../src/core/prng.ts';

describe('quantile bins', () => {
  it('code <= b exactly when x <= cuts[b]; NaN gets the missing code; at most maxBins bins', () => {
    fc.assert(
      fc.property(
        fc.array(fc.oneof(fc.float({ noNaN: true }), fc.constant(NaN), fc.integer({ min: -3, max: 3 })), { minLength: 1, maxLength: 300 }),
        fc.integer({ min: 2, max: 255 }),
        (values, maxBins) => {
          const x = Float32Array.from(values);
          const n = x.length;
          const cuts = computeCuts(x, n, 1, maxBins)[0];
          expect(cuts.length).toBeLessThanOrEqual(maxBins - 1);
          for (let i = 1; i < cuts.length; i++) expect(cuts[i]).toBeGreaterThan(cuts[i - 1]);
          const { codes } = binFeatures(x, n, 1, [cuts]);
          for (let r = 0; r < n; r++) {
            if (Number.isNaN(x[r])) {
              expect(codes[r]).toBe(MISSING_CODE);
              continue;
            }
            for (let b = 0; b < cuts.length; b++) expect(codes[r] <= b).toBe(x[r] <= cuts[b]);
          }
        },
      ),
      { numRuns: 200 },
    );
  });

  it('gives every distinct value its own bin when there are few of them', () => {
    const x = Float32Array.from([5, 1, 1, 3, 5, 2, NaN, 3]);
    const cuts = computeCuts(x, x.length, 1, 16)[0];
    expect(cuts.length).toBe(3); // 4 distinct values
    const { codes } = binFeatures(x, x.length, 1, [cuts]);
    expect(Array.from(codes)).toEqual([3, 0, 0, 2, 3, 1, MISSING_CODE, 2]);
  });

  it('spreads continuous values evenly over the bins (quantiles)', () => {
    const rng = createPrng(3);
    const n = 25_500;
    const x = Float32Array.from({ length: n }, () => rng.normal());
    const cuts = computeCuts(x, n, 1, 255)[0];
    expect(cuts.length).toBe(254);
    const counts = new Array(255).fill(0);
    const { codes } = binFeatures(x, n, 1, [cuts]);
    for (const c of codes) counts[c]++;
    // n / 255 = 100 rows per bin by construction of the ranks.
    expect(Math.min(...counts)).toBeGreaterThanOrEqual(99);
    expect(Math.max(...counts)).toBeLessThanOrEqual(101);
  });

  it('stores codes column-major: codes[f * nRows + r]', () => {
    const x = Float32Array.from([0, 10, 1, 20, 2, 30]); // 3 rows × 2 features
    const cuts = computeCuts(x, 3, 2, 8);
    const { codes } = binFeatures(x, 3, 2, cuts);
    expect(Array.from(codes)).toEqual([0, 1, 2, 0, 1, 2]);
  });
});
