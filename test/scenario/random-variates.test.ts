import { describe, expect, it } from 'vitest';
import { createVariates, mixSeed } from '../../src/scenario/random-variates.ts';

describe('scenario variates', () => {
  it('gamma draws have mean kθ and variance kθ² (definition of the gamma law), also for shape < 1', () => {
    for (const [shape, scale] of [[0.75, 8], [2.5, 1.2]]) {
      const v = createVariates(5, 1);
      const n = 200_000;
      let s = 0;
      let s2 = 0;
      let min = Infinity;
      for (let i = 0; i < n; i++) {
        const x = v.gamma(shape, scale);
        if (x < min) min = x;
        s += x;
        s2 += x * x;
      }
      expect(min).toBeGreaterThan(0);
      const mean = s / n;
      const variance = s2 / n - mean * mean;
      expect(mean / (shape * scale)).toBeCloseTo(1, 1);
      expect(variance / (shape * scale * scale)).toBeCloseTo(1, 1);
    }
  });

  it('uniform draws lie in (0, 1]; same seed and stream repeat, other streams differ', () => {
    const a = createVariates(9, 2);
    const b = createVariates(9, 2);
    const c = createVariates(9, 3);
    const xa = Array.from({ length: 1000 }, () => a.uniform());
    expect(xa.every((u) => u > 0 && u <= 1)).toBe(true);
    expect(Array.from({ length: 1000 }, () => b.uniform())).toEqual(xa);
    expect(Array.from({ length: 1000 }, () => c.uniform())).not.toEqual(xa);
  });

  it('mixSeed separates nearby keys', () => {
    const seen = new Set<number>();
    for (let i = 0; i < 5000; i++) seen.add(mixSeed(1, 0, i));
    expect(seen.size).toBe(5000);
    expect(mixSeed(1, 2)).not.toBe(mixSeed(2, 1));
  });
});
