import { readFileSync } from 'node:fs';
import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { quantiles, quantileSorted, sortedFinite } from '../../src/core/scores/quantile.ts';
import { countAboveSorted, exceedanceProbability } from '../../src/core/scores/exceedance.ts';

// Reference values made by Debian's python3-numpy 1.24.2 (numpy.quantile, method='linear',
// Hyndman & Fan 1996 definition 7) with test/fixtures/quantiles/make.py.
const ref = JSON.parse(
  readFileSync(new URL('../fixtures/quantiles/reference.json', import.meta.url), 'utf8'),
) as {
  numpy_version: string;
  cases: { values: number[]; probs: number[]; quantiles: number[]; thresholds: number[]; exceedance: number[] }[];
};

function close(a: number, b: number, rel = 1e-13): boolean {
  return Math.abs(a - b) <= rel * Math.max(1, Math.abs(b));
}

describe('quantiles (Hyndman & Fan definition 7)', () => {
  it(`match numpy ${ref.numpy_version} method='linear'`, () => {
    for (const c of ref.cases) {
      const got = quantiles(c.values, c.probs);
      c.quantiles.forEach((q, i) => expect(close(got[i], q), `p=${c.probs[i]} n=${c.values.length}`).toBe(true));
    }
  });

  it(`exceedance P(X > t) matches numpy ${ref.numpy_version} mean(x > t)`, () => {
    for (const c of ref.cases) {
      const s = sortedFinite(c.values);
      c.thresholds.forEach((t, i) => {
        expect(exceedanceProbability(c.values, t)).toBe(c.exceedance[i]);
        expect(countAboveSorted(s, t) / s.length).toBe(c.exceedance[i]);
      });
    }
  });

  it('skips NaN and null, and gives NaN for no values', () => {
    expect(Array.from(quantiles([NaN, 1, null, 3], [0.5]))).toEqual([2]);
    expect(Number.isNaN(quantiles([null, NaN], [0.5])[0])).toBe(true);
    expect(exceedanceProbability([null, 2, NaN, 0], 1)).toBe(0.5);
  });

  it('works on a slice of a larger sorted array', () => {
    const x = new Float64Array([9, 1, 2, 3, 4, 9]);
    expect(quantileSorted(x, 0.5, 1, 4)).toBe(2.5);
    expect(countAboveSorted(x, 2, 1, 4)).toBe(2);
  });

  it('property: quantiles are monotone in p and lie within [min, max]', () => {
    fc.assert(
      fc.property(
        fc.array(fc.double({ min: -1e6, max: 1e6, noNaN: true }), { minLength: 1, maxLength: 60 }),
        fc.array(fc.double({ min: 0, max: 1, noNaN: true }), { minLength: 2, maxLength: 10 }),
        (xs, ps) => {
          ps.sort((a, b) => a - b);
          const q = quantiles(xs, ps);
          const lo = Math.min(...xs);
          const hi = Math.max(...xs);
          for (let i = 0; i < q.length; i++) {
            if (q[i] < lo || q[i] > hi) return false;
            if (i > 0 && q[i] < q[i - 1]) return false;
          }
          return true;
        },
      ),
    );
  });
});
