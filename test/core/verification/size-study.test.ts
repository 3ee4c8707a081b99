import { describe, expect, it } from 'vitest';
import { compareForecasts, createPrng, crpsSorted, ensembleSizeStudy, type VerificationCase } from '../../../src/core/index.ts';

/** Observation and members all drawn from N(μ_c, 1): exchangeable members. */
function exchangeableCases(nCases: number, m: number, seed: number): VerificationCase[] {
  const g = createPrng(seed);
  return Array.from({ length: nCases }, () => {
    const mu = 10 * g.normal();
    const members = Float64Array.from({ length: m }, () => g.normal(mu, 1));
    return { lead: 0, observation: g.normal(mu, 1), raw: members, corrected: members };
  });
}

describe('ensemble-size study', () => {
  it('standard CRPS falls with size towards a size-independent fair CRPS (Ferro 2014)', () => {
    const M = 50;
    const cases = exchangeableCases(400, M, 12);
    const [study] = ensembleSizeStudy(cases, { repeats: 20, seed: 3 });
    expect(study.source).toBe('corrected');
    expect(study.members).toBe(M);
    expect(study.rows.map((r) => r.size)).toEqual([5, 10, 25, 50]);
    // Known answer for each size, from the full ensembles: fair CRPS is a U-statistic, so its mean
    // over random subsets of size m equals the full-ensemble fair CRPS F; the standard CRPS of a
    // subset exceeds it by D/(2m), D = mean |x_i − x_j| over member pairs (both from the sorted
    // formula CRPS = Σ|x − y|/m − S/m², S = Σ_{i<j}|x_i − x_j| — the kernel form E|X − y| − ½E|X − X′|
    // of Gneiting & Raftery 2007, from memory — and the fair one with S/(m(m − 1)) of Ferro 2014).
    let F = 0;
    let D = 0;
    for (const c of cases) {
      const x = Float64Array.from(c.corrected as Float64Array).sort();
      const y = c.observation as number;
      F += crpsSorted(x, y, true);
      D += 2 * M * (crpsSorted(x, y) - crpsSorted(x, y, true)); // standard − fair = S/(M²(M−1)) = D/(2M)
    }
    F /= cases.length;
    D /= cases.length;
    for (const row of study.rows) {
      expect(row.cases).toBe(400);
      expect(Math.abs(row.fairCrps! / F - 1)).toBeLessThan(0.01);
      expect(Math.abs(row.crps! / (F + D / (2 * row.size)) - 1)).toBeLessThan(0.01);
    }
    for (let i = 1; i < study.rows.length; i++) {
      expect(study.rows[i].crps!).toBeLessThan(study.rows[i - 1].crps!);
      // Band width grows and band coverage rises towards nominal with size; PIT coverage is nominal at every size.
      expect(study.rows[i].meanWidth!).toBeGreaterThan(study.rows[i - 1].meanWidth!);
      expect(study.rows[i].coverage!).toBeGreaterThan(study.rows[i - 1].coverage!);
    }
    // Population check: for y ~ N(μ, 1) and a calibrated N(μ, 1) forecast, E[CRPS] = 1/√π
    // (Gaussian closed form of Gneiting et al. 2005 averaged over y, worked by hand); mean over
    // 400 cases has a standard error near 0.02.
    expect(Math.abs(F - 1 / Math.sqrt(Math.PI))).toBeLessThan(0.08);
    for (const row of study.rows) {
      expect(Math.abs(row.pitCoverage! - 0.95)).toBeLessThan(3 * Math.sqrt((0.95 * 0.05) / (400 * 20)) + 0.02);
      expect(row.alphaIndex!).toBeGreaterThan(0.9);
      expect(row.alphaIndexSd!).toBeGreaterThanOrEqual(0);
    }
  });

  it('runs inside compareForecasts, with explicit sizes, case stride and reproducible seeds', () => {
    const cases = exchangeableCases(100, 12, 4);
    const opts = { sizeStudy: { sources: ['raw' as const, 'corrected' as const], sizes: [3, 6, 40], repeats: 4, caseFraction: 0.5, seed: 9 } };
    const a = compareForecasts(cases, opts);
    const b = compareForecasts(cases, opts);
    expect(a.sizeStudy).toEqual(b.sizeStudy);
    expect(a.sizeStudy!.map((s) => s.source)).toEqual(['raw', 'corrected']);
    const rows = a.sizeStudy![1].rows;
    expect(rows.map((r) => r.size)).toEqual([3, 6]); // 40 > 12 members available
    expect(rows[0].cases).toBeGreaterThan(30); // about half of 100, drawn at random
    expect(rows[0].cases).toBeLessThan(70);
    expect(rows[1].cases).toBe(rows[0].cases);
    expect(() => compareForecasts(cases, { sizeStudy: { sources: ['stochastic'] } })).toThrow(/not compared/);
  });
});
