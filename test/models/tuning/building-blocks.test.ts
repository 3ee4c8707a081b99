import { describe, expect, it } from 'vitest';
import { createPrng } from '../../../src/core/prng.ts';
import { cholesky, solveLower, solveUpper } from '../../../src/models/tuning/cholesky.ts';
import { latinHypercube } from '../../../src/models/tuning/latin-hypercube.ts';
import { nelderMead } from '../../../src/models/tuning/nelder-mead.ts';
import { checkSpace, decodePoint, decodeValue, encodePoint } from '../../../src/models/tuning/space.ts';
import type { SearchParam } from '../../../src/models/tuning/space.ts';

describe('Cholesky', () => {
  it('recovers a factor worked by hand and solves with it', () => {
    // L = [[2,0,0],[1,3,0],[-1,2,4]] → A = L Lᵀ = [[4,2,-2],[2,10,5],[-2,5,21]] (by hand)
    const a = Float64Array.from([4, 2, -2, 2, 10, 5, -2, 5, 21]);
    const l = new Float64Array(9);
    expect(cholesky(a, 3, l)).toBe(true);
    expect(Array.from(l)).toEqual([2, 0, 0, 1, 3, 0, -1, 2, 4]);
    // A x = b with x = [1, -1, 2]: b = [-2, 2, 35] (by hand)
    const b = Float64Array.from([-2, 2, 35]);
    solveLower(l, 3, b);
    solveUpper(l, 3, b);
    expect(Array.from(b).map((v) => Math.round(v * 1e12) / 1e12)).toEqual([1, -1, 2]);
  });

  it('refuses a matrix that is not positive definite', () => {
    expect(cholesky(Float64Array.from([1, 2, 2, 1]), 2, new Float64Array(4))).toBe(false);
  });
});

describe('Nelder–Mead', () => {
  it('finds the minimum of the Rosenbrock function at (1, 1) (from memory: f = 0 there)', () => {
    const r = nelderMead((x) => 100 * (x[1] - x[0] ** 2) ** 2 + (1 - x[0]) ** 2, [-1.2, 1], {
      maxEvaluations: 2000, valueTolerance: 1e-14, pointTolerance: 1e-9,
    });
    expect(r.x[0]).toBeCloseTo(1, 5);
    expect(r.x[1]).toBeCloseTo(1, 5);
    expect(r.value).toBeLessThan(1e-10);
  });
});

describe('Latin hypercube', () => {
  it('puts exactly one point in each stratum of each dimension, reproducibly', () => {
    const n = 10;
    const d = 3;
    const pts = latinHypercube(n, d, createPrng(42));
    for (let k = 0; k < d; k++) {
      const strata = Array.from({ length: n }, (_, i) => Math.floor(pts[i * d + k] * n)).sort((a, b) => a - b);
      expect(strata).toEqual(Array.from({ length: n }, (_, i) => i));
    }
    expect(latinHypercube(n, d, createPrng(42))).toEqual(pts);
    expect(latinHypercube(n, d, createPrng(43))).not.toEqual(pts);
  });
});

describe('search space', () => {
  const space: SearchParam[] = [
    { name: 'depth', kind: 'int', low: 2, high: 8 },
    { name: 'rate', kind: 'logfloat', low: 0.001, high: 0.1 },
    { name: 'fraction', kind: 'float', low: 0.5, high: 1 },
  ];

  it('maps the unit cube to values and back', () => {
    expect(decodePoint(space, [0, 0, 0])).toEqual({ depth: 2, rate: 0.001, fraction: 0.5 });
    expect(decodePoint(space, [1, 1, 1])).toEqual({ depth: 8, rate: 0.1, fraction: 1 });
    // log scale: the middle is the geometric mean √(0.001·0.1) = 0.01
    expect(decodeValue(space[1], 0.5)).toBeCloseTo(0.01, 15);
    expect(decodeValue(space[0], 0.49)).toBe(5); // 2 + 0.49·6 = 4.94 → 5
    const u = new Float64Array(3);
    encodePoint(space, { depth: 5, rate: 0.01, fraction: 0.75 }, u);
    expect(Array.from(u).map((v) => Math.round(v * 1e12) / 1e12)).toEqual([0.5, 0.5, 0.5]);
  });

  it('rejects bad declarations', () => {
    expect(() => checkSpace([{ name: 'a', kind: 'logfloat', low: 0, high: 1 }])).toThrow(/low > 0/);
    expect(() => checkSpace([{ name: 'a', kind: 'int', low: 0.5, high: 3 }])).toThrow(/integer/);
    expect(() => checkSpace([{ name: 'a', kind: 'float', low: 1, high: 1 }])).toThrow(/low < high/);
    expect(() => checkSpace([space[0], space[0]])).toThrow(/twice/);
  });
});
