import { readFileSync } from 'node:fs';
import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { crpsEnsemble, crpsPerCase, crpsSorted, crpsWeighted, meanCrps } from '../../src/core/scores/crps.ts';
import { crpsGaussian } from '../../src/core/scores/crps-gaussian.ts';
import { normalQuantile } from '../../src/core/scores/normal.ts';

const ref = JSON.parse(readFileSync(new URL('../fixtures/scores/reference.json', import.meta.url), 'utf8'));

describe('ensemble CRPS', () => {
  // Source: properscoring 0.1 test suite, properscoring/tests/test_crps.py: test_crps_toy_examples; the
  // last row is its equal-weight example of test_crps_weight_examples (1.5, [0, 1, 2] → 1/9 + 4/9·0.5 + 1/9·0.5).
  const table: [number, number[], number][] = [
    [0, [0, 1], 0.25],
    [2, [0, 1], 1.25],
    [0, [-1, 1], 0.5],
    [0, [0, 0, 1], 1 / 9],
    [1, [0, 0, 1], 4 / 9],
    [0, [-1, 0, 0, 1], 1 / 8],
    [0, [0, 0], 0],
    [1.5, [0, 1, 2], 1 / 9 + 2 / 9 + 1 / 18],
  ];
  it.each(table)('properscoring toy example: y=%s members=%j → %s', (y, members, expected) => {
    expect(crpsEnsemble(members, y)).toBeCloseTo(expected, 14);
    // The weighted integration path must agree with equal weights.
    expect(crpsWeighted(members, members.map(() => 1), y)).toBeCloseTo(expected, 14);
  });

  it('weighted example y=1, members [0, 2], weights [0.8, 0.2] → 0.68 (properscoring 0.1, properscoring/tests/test_crps.py, test_crps_weight_examples)', () => {
    expect(crpsWeighted([0, 2], [0.8, 0.2], 1)).toBeCloseTo(0.68, 14);
  });

  it('fair CRPS (Ferro 2014), worked by hand from the sorted formula', () => {
    expect(crpsEnsemble([0, 1], 2, true)).toBeCloseTo(1.0, 14);
    expect(crpsEnsemble([0, 0, 1], 1, true)).toBeCloseTo(1 / 3, 14);
    expect(crpsEnsemble([0, 1], 0, true)).toBeCloseTo(0, 14);
    expect(Number.isNaN(crpsEnsemble([3], 1, true))).toBe(true);
  });

  it('one-member ensemble: CRPS equals the absolute error (CRPS reduces to MAE for a point forecast, Hersbach 2000)', () => {
    fc.assert(
      fc.property(fc.double({ min: -1e6, max: 1e6, noNaN: true }), fc.double({ min: -1e6, max: 1e6, noNaN: true }), (x, y) =>
        Math.abs(crpsEnsemble([x], y) - Math.abs(x - y)) <= 1e-9 * Math.max(1, Math.abs(x - y)),
      ),
    );
  });

  it(`matches numerical integration by scipy ${ref.scipy_version} quad (test/fixtures/scores/make.py)`, () => {
    for (const c of ref.crps_by_integration) {
      expect(crpsEnsemble(c.members, c.obs)).toBeCloseTo(c.crps, 9);
    }
  });

  it('Gaussian closed form (Gneiting et al. 2005): N(0,1) at y=0 → 0.2336950, y=1 → 0.6024413 (properscoring 0.1 README: crps_gaussian 0.23369498 and 0.60244136)', () => {
    expect(crpsGaussian(0, 1, 0)).toBeCloseTo(0.233695, 6);
    expect(crpsGaussian(0, 1, 1)).toBeCloseTo(0.6024413, 6);
    // Scaling: CRPS(N(μ,σ²), y) = σ·CRPS(N(0,1), (y−μ)/σ).
    expect(crpsGaussian(10, 3, 13)).toBeCloseTo(3 * 0.6024413, 6);
    expect(crpsGaussian(2, 0, 5)).toBe(3);
  });

  it('1000-member ensemble at N(0,1) quantiles (i − 0.5)/1000 matches the closed form to relative 1e-4 (properscoring 0.1, properscoring/tests/test_crps.py, test_crps_gaussian_consistent)', () => {
    const m = 1000;
    const members = new Float64Array(m);
    for (let i = 1; i <= m; i++) members[i - 1] = normalQuantile((i - 0.5) / m);
    for (const y of [-3, -1, -0.2, 0, 0.5, 1, 2.5]) {
      const exact = crpsGaussian(0, 1, y);
      expect(Math.abs(crpsSorted(members, y) - exact) / exact).toBeLessThan(1e-4);
    }
  });

  it('per-case and mean CRPS skip missing observations', () => {
    const ens = [0, 1, 0, 1, -1, 1];
    const per = crpsPerCase(ens, [0, null, 0], 2);
    expect(per[0]).toBeCloseTo(0.25, 14);
    expect(Number.isNaN(per[1])).toBe(true);
    expect(per[2]).toBeCloseTo(0.5, 14);
    const m = meanCrps(ens, [0, NaN, 0], 2);
    expect(m.n).toBe(2);
    expect(m.crps).toBeCloseTo(0.375, 14);
  });

  describe('properties (fast-check)', () => {
    const members = fc.array(fc.double({ min: -1e4, max: 1e4, noNaN: true }), { minLength: 2, maxLength: 40 });
    const obs = fc.double({ min: -1e4, max: 1e4, noNaN: true });
    it('CRPS ≥ 0 and fair ≤ standard', () => {
      fc.assert(
        fc.property(members, obs, (xs, y) => {
          const s = crpsEnsemble(xs, y);
          const f = crpsEnsemble(xs, y, true);
          return s >= -1e-9 * (1 + Math.abs(y)) && f <= s + 1e-9 * (1 + Math.abs(s));
        }),
      );
    });
    it('CRPS does not depend on member order', () => {
      fc.assert(
        fc.property(members, obs, (xs, y) => {
          const a = crpsEnsemble(xs, y);
          const b = crpsEnsemble([...xs].reverse(), y);
          const c = crpsWeighted(xs, xs.map(() => 1), y);
          const tol = 1e-9 * (1 + Math.abs(a));
          return Math.abs(a - b) <= tol && Math.abs(a - c) <= tol;
        }),
      );
    });
  });
});
