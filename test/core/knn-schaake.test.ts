import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { defaultK, harmonicCumulative, lallSharmaWeights, nearestSorted, pickKernelIndex, circularDayDistance } from '../../src/core/stochastic/knn.ts';
import { schaakeShuffle } from '../../src/core/stochastic/schaake.ts';
import { radixOrder, sortNonNegative } from '../../src/core/stochastic/radix-sort.ts';
import { createPrng } from '../../src/core/prng.ts';

describe('kNN (Lall & Sharma 1996)', () => {
  it('kernel weights for k = 3 are 6/11, 3/11, 2/11 (worked by hand from the Lall & Sharma 1996 kernel: (1/j)/(1 + 1/2 + 1/3))', () => {
    const w = lallSharmaWeights(3);
    expect(w[0]).toBeCloseTo(6 / 11, 15);
    expect(w[1]).toBeCloseTo(3 / 11, 15);
    expect(w[2]).toBeCloseTo(2 / 11, 15);
  });

  it('default k = round(√n)', () => {
    expect(defaultK(9)).toBe(3);
    expect(defaultK(7300)).toBe(85);
    expect(defaultK(0)).toBe(1);
  });

  it('pickKernelIndex maps uniforms onto the kernel exactly at the boundaries', () => {
    const cum = harmonicCumulative(3);
    expect(pickKernelIndex(cum, 3, 0)).toBe(0);
    expect(pickKernelIndex(cum, 3, 6 / 11 - 1e-12)).toBe(0);
    expect(pickKernelIndex(cum, 3, 6 / 11 + 1e-12)).toBe(1);
    expect(pickKernelIndex(cum, 3, 9 / 11 + 1e-12)).toBe(2);
    expect(pickKernelIndex(cum, 3, 1 - 1e-16)).toBe(2);
  });

  it('nearestSorted returns the k nearest, nearest first, lower value first on equal distance', () => {
    const pred = [1, 2, 4, 7, 8, 20];
    const out = new Float64Array(4);
    const n = nearestSorted(pred, [0, 1, 2, 3, 4, 5], 0, 6, 5, 4, out);
    expect(n).toBe(4);
    expect(Array.from(out)).toEqual([2, 3, 1, 4]); // 4 (d1), 7 (d2), 2 (d3), 8 (d3: higher, so after 2)
  });

  it('property: nearestSorted agrees with sorting by distance', () => {
    fc.assert(
      fc.property(
        fc.array(fc.integer({ min: -50, max: 50 }), { minLength: 1, maxLength: 40 }),
        fc.integer({ min: -60, max: 60 }),
        fc.integer({ min: 1, max: 40 }),
        (xs, x, k) => {
          const pred = [...xs].sort((a, b) => a - b);
          const out = new Float64Array(k);
          const got = nearestSorted(pred, pred, 0, pred.length, x, k, out);
          const want = [...pred].sort((a, b) => Math.abs(a - x) - Math.abs(b - x) || a - b).slice(0, k);
          return got === want.length && want.every((v, i) => out[i] === v);
        },
      ),
    );
  });

  it('circular day distance wraps over the year end', () => {
    expect(circularDayDistance(1, 365)).toBeCloseTo(1.25, 12);
    expect(circularDayDistance(100, 130)).toBe(30);
  });
});

describe('Schaake shuffle (Clark et al. 2004)', () => {
  it('worked by hand: members {10, 20, 30} with template {5, 1, 3} → [30, 10, 20] (rank matching of Clark et al. 2004)', () => {
    expect(Array.from(schaakeShuffle([10, 20, 30], [5, 1, 3], 3, 1))).toEqual([30, 10, 20]);
    // Order of the samples does not matter, only their set.
    expect(Array.from(schaakeShuffle([20, 30, 10], [5, 1, 3], 3, 1))).toEqual([30, 10, 20]);
  });

  it('property: keeps each lead marginal exactly and reproduces the template ranks', () => {
    fc.assert(
      fc.property(fc.integer({ min: 1, max: 30 }), fc.integer({ min: 1, max: 5 }), fc.integer({ min: 0, max: 1e6 }), (n, H, seed) => {
        const g = createPrng(seed);
        const samples = Float64Array.from({ length: n * H }, () => Math.round(g.normal() * 10));
        const template = Float64Array.from({ length: n * H }, () => g.normal()); // no ties (continuous)
        const out = schaakeShuffle(samples, template, n, H);
        for (let h = 0; h < H; h++) {
          const a = Array.from(samples.subarray(h * n, (h + 1) * n)).sort((x, y) => x - y);
          const b = Array.from(out.subarray(h * n, (h + 1) * n)).sort((x, y) => x - y);
          if (a.some((v, i) => v !== b[i])) return false;
          for (let i = 0; i < n; i++) {
            for (let j = 0; j < n; j++) {
              // Template order implies output order (ties in samples allowed).
              if (template[h * n + i] < template[h * n + j] && !(out[h * n + i] <= out[h * n + j])) return false;
            }
          }
        }
        return true;
      }),
    );
  });
});

describe('radix sorts used by the stage', () => {
  it('property: sortNonNegative equals the built-in sort', () => {
    fc.assert(
      fc.property(fc.array(fc.oneof(fc.double({ min: 0, max: 1e12, noNaN: true }), fc.constant(0), fc.integer({ min: 0, max: 5 })), { maxLength: 300 }), (xs) => {
        const n = xs.length;
        const a = new Float64Array(Math.max(n, 1));
        xs.forEach((v, i) => (a[i] = v === 0 ? 0 : v));
        const tmp = new Float64Array(a.length);
        sortNonNegative(a, n, tmp, new Uint32Array(a.buffer), new Uint32Array(tmp.buffer), new Int32Array(1024));
        const want = Float64Array.from(xs).sort();
        return want.every((v, i) => v === a[i]);
      }),
    );
  });

  it('sortNonNegative falls back correctly for values that share high words', () => {
    const g = createPrng(1);
    const n = 500;
    const a = Float64Array.from({ length: n }, () => 100 + g.nextFloat() * 1e-9);
    const want = Float64Array.from(a).sort();
    const tmp = new Float64Array(n);
    sortNonNegative(a, n, tmp, new Uint32Array(a.buffer), new Uint32Array(tmp.buffer), new Int32Array(1024));
    expect(Array.from(a)).toEqual(Array.from(want));
  });

  it('property: radixOrder is a stable argsort', () => {
    fc.assert(
      fc.property(fc.array(fc.integer({ min: 0, max: 200000 }), { minLength: 1, maxLength: 200 }), (xs) => {
        const n = xs.length;
        const keys = Uint32Array.from(xs);
        const order = new Int32Array(n);
        radixOrder(keys, n, 18, order, new Uint32Array(n), new Int32Array(n), new Int32Array(1024));
        const want = xs.map((_, i) => i).sort((a, b) => xs[a] - xs[b] || a - b);
        return want.every((v, i) => v === order[i]);
      }),
    );
  });
});
