import { describe, expect, it } from 'vitest';
import { alphaIndex } from '../../src/core/scores/alpha-index.ts';
import { pitQQ } from '../../src/core/scores/pit-qq.ts';
import { pitValues } from '../../src/core/scores/pit.ts';
import { rankHistogram } from '../../src/core/scores/rank-histogram.ts';
import { intervalCoverage } from '../../src/core/scores/interval-coverage.ts';
import { createPrng } from '../../src/core/prng.ts';

describe('PIT, alpha index, QQ data, rank histogram, interval coverage', () => {
  it('alpha index: worked example PIT [0.1, 0.4, 0.6, 0.9] → 0.9 with u_t = t/(n+1) (worked by hand from Renard et al. 2010)', () => {
    expect(alphaIndex([0.9, 0.1, 0.6, 0.4])).toBeCloseTo(0.9, 14);
    expect(alphaIndex([0.5, 0.5, 0.5, 0.5])).toBeLessThan(0.9);
  });

  it('alpha index near 1 for uniform PIT (Renard et al. 2010: α = 1 for perfect reliability)', () => {
    const g = createPrng(11);
    const pit = Float64Array.from({ length: 5000 }, () => g.nextFloat());
    // Mean |sorted − expected| for n uniforms is O(n^-1/2); 0.97 leaves room for that (common practice).
    expect(alphaIndex(pit)).toBeGreaterThan(0.97);
  });

  it('PIT of an exchangeable ensemble is uniform, ties included, and reproducible by seed', () => {
    const g = createPrng(3);
    const m = 9;
    const nCases = 4000;
    const ens = new Float64Array(nCases * m);
    const obs = new Float64Array(nCases);
    for (let c = 0; c < nCases; c++) {
      // Rounded values make many ties (zero flows tie in real data).
      for (let j = 0; j < m; j++) ens[c * m + j] = Math.max(0, Math.round(g.normal(0.5, 1)));
      obs[c] = Math.max(0, Math.round(g.normal(0.5, 1)));
    }
    const pit = pitValues(ens, obs, m, 42);
    expect(Array.from(pitValues(ens, obs, m, 42))).toEqual(Array.from(pit));
    const h = rankHistogram(pit, 10);
    // Each of 10 bins expects 400; binomial SD ≈ 19; allow 5 SD.
    for (const c of h) expect(Math.abs(c - 400)).toBeLessThan(5 * 19);
    expect(alphaIndex(pit)).toBeGreaterThan(0.95);
  });

  it('PIT by hand: members [1, 2, 2, 3], y = 2 → (1 + U·3)/5; missing obs → NaN', () => {
    const pit = pitValues([1, 2, 2, 3, 0, 0, 0, 0], [2, null], 4, 1);
    expect(pit[0]).toBeGreaterThanOrEqual(1 / 5);
    expect(pit[0]).toBeLessThan(4 / 5);
    expect(Number.isNaN(pit[1])).toBe(true);
  });

  it('rank histogram with nMembers + 1 bins counts ranks', () => {
    // y below all members → rank 0; above all → rank m.
    const pit = pitValues([1, 2, 3, 1, 2, 3, 1, 2, 3], [0, 5, 2.5], 3, 9);
    expect(Array.from(rankHistogram(pit, 4))).toEqual([1, 0, 1, 1]);
  });

  it('QQ data uses the same plotting positions as the alpha index', () => {
    const q = pitQQ([0.9, NaN, 0.1, 0.5]);
    expect(Array.from(q.uniform)).toEqual([0.25, 0.5, 0.75]);
    expect(Array.from(q.pit)).toEqual([0.1, 0.5, 0.9]);
  });

  it('interval coverage and width: 90 % interval of a calibrated normal ensemble covers ~90 %', () => {
    const g = createPrng(8);
    const m = 200;
    const nCases = 2000;
    const ens = new Float64Array(nCases * m);
    const obs: (number | null)[] = [];
    for (let c = 0; c < nCases; c++) {
      for (let j = 0; j < m; j++) ens[c * m + j] = g.normal();
      obs.push(c % 10 === 0 ? null : g.normal());
    }
    const r = intervalCoverage(ens, obs, m, 0.9);
    expect(r.n).toBe(1800);
    // Binomial SE sqrt(.9·.1/1800) = 0.007; sampling of the ends adds a little; 0.03 ≈ 4 SE.
    expect(Math.abs(r.coverage - 0.9)).toBeLessThan(0.03);
    // Width of N(0,1) 90 % interval = 2·1.644854: 2·scipy.stats.norm.ppf(0.95) = 3.2897073 (Debian
    // python3-scipy 1.10.1, printed by test/fixtures/normal-table/print_values.py).
    expect(Math.abs(r.meanWidth - 2 * 1.644854)).toBeLessThan(0.05);
    const hand = intervalCoverage([0, 1, 2, 3, 4, 0, 1, 2, 3, 4], [4, 4.5], 5, 0.5);
    // Quantiles 0.25, 0.75 of 0..4 = 1 and 3 (Hyndman & Fan 1996, definition 7; worked by hand):
    // neither 4 nor 4.5 inside; width 2.
    expect(hand).toEqual({ n: 2, coverage: 0, meanWidth: 2 });
  });
});
