import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import {
  HersbachAccumulator,
  binomialLowerTail,
  classifySpread,
  compareForecasts,
  createPrng,
  crpsGaussian,
  hersbachDecomposition,
  isMidpointGrid,
  midpointProbs,
  normalQuantile,
  pairedDifference,
  pitFromSorted,
  pitValues,
  ValueSorter,
  type VerificationCase,
} from '../../../src/core/index.ts';

const binom = JSON.parse(readFileSync(new URL('../../fixtures/binomial/reference.json', import.meta.url), 'utf8')) as {
  scipy: string;
  cases: { k: number; n: number; p: number; cdf: number }[];
};

describe('verification building blocks', () => {
  it('value sorter: radix path for long non-negative rows (zeros, ties, −0 written as +0) equals the engine sort', () => {
    const g = createPrng(2);
    const sorter = new ValueSorter();
    for (const n of [10, 300, 1000, 5000]) {
      const row = Float64Array.from({ length: n }, (_, i) => (i % 9 === 0 ? 0 : i % 5 === 0 ? 12.5 : Math.exp(3 * g.normal())));
      const ref = Float64Array.from(row).sort();
      expect(Array.from(sorter.sort(row, n, true))).toEqual(Array.from(ref));
    }
    const mixed = Float64Array.from([3, -1, 2, 0, -5]);
    expect(Array.from(sorter.sort(mixed, 5, false))).toEqual([-5, -1, 0, 2, 3]);
  });

  it('binomial lower tail matches scipy.stats.binom.cdf (python3-scipy 1.10.1, test/fixtures/binomial/make.py)', () => {
    expect(binom.scipy).toBe('1.10.1');
    for (const c of binom.cases) {
      const v = binomialLowerTail(c.k, c.n, c.p);
      expect(Math.abs(v - c.cdf)).toBeLessThanOrEqual(1e-9 * c.cdf + 1e-15);
    }
    expect(binomialLowerTail(-1, 10, 0.9)).toBe(0);
  });

  it('PIT from sorted values is the rule of pitValues: same uniforms give the same PIT, ties included', () => {
    const g = createPrng(5);
    const m = 7;
    const n = 500;
    const ens = new Float64Array(n * m);
    const obs = new Float64Array(n);
    for (let c = 0; c < n; c++) {
      for (let j = 0; j < m; j++) ens[c * m + j] = Math.round(g.normal(1, 1));
      obs[c] = Math.round(g.normal(1, 1));
    }
    const ref = pitValues(ens, obs, m, 99);
    const u = createPrng(99); // pitValues draws one uniform per case from createPrng(seed)
    for (let c = 0; c < n; c++) {
      const row = ens.slice(c * m, (c + 1) * m).sort();
      expect(pitFromSorted(row, m, obs[c], u.nextFloat())).toBe(ref[c]);
    }
  });

  it('streamed Hersbach decomposition equals hersbachDecomposition (src/core/scores/hersbach.ts) case by case', () => {
    const g = createPrng(8);
    const m = 6;
    const n = 400;
    const ens = new Float64Array(n * m);
    const obs = new Float64Array(n);
    for (let c = 0; c < n; c++) {
      for (let j = 0; j < m; j++) ens[c * m + j] = Math.round(4 * g.normal(0, 1)) / 4;
      // Every 7th observation equals a member, to exercise the width clipping.
      obs[c] = c % 7 === 0 ? ens[c * m + 2] : g.normal(0.3, 1.3);
    }
    const ref = hersbachDecomposition(ens, obs, m);
    const acc = new HersbachAccumulator(m);
    for (let c = 0; c < n; c++) acc.add(ens.slice(c * m, (c + 1) * m).sort(), obs[c]);
    const r = acc.result();
    for (const k of ['n', 'crps', 'reliability', 'potential', 'uncertainty', 'resolution'] as const) expect(r[k]).toBeCloseTo(ref[k], 12);
    for (let i = 0; i <= m; i++) {
      expect(r.g[i]).toBeCloseTo(ref.g[i], 12);
      expect(r.o[i]).toBeCloseTo(ref.o[i], 12);
    }
    // Hersbach (2000): reliability + potential = mean CRPS.
    expect(r.reliability + r.potential).toBeCloseTo(r.crps, 12);
  });

  it('paired difference with batch means, by hand: d = 1 … 10, 2 batches → mean 5.5, se 2.5, t 2.2', () => {
    const d = pairedDifference([1, 2, 3, 4, 5, 6, 7, 8, 9, 10], new Float64Array(10), 2);
    // Batch means 3 and 8; sd = √(2·2.5²) = 3.5355; se = sd/√2 = 2.5.
    expect(d.meanDifference).toBe(5.5);
    expect(d.standardError).toBeCloseTo(2.5, 12);
    expect(d.t).toBeCloseTo(2.2, 12);
    expect(d.batches).toBe(2);
    expect(pairedDifference([1, 2], [0, 0]).t).toBeNull(); // too few cases for batches
  });

  it('spread class from PIT coverage of [0.05, 0.95], by hand with n = 100 (tolerance max(0.03, 2·0.03) = 0.06)', () => {
    const pits = (inside: number) => Array.from({ length: 100 }, (_, i) => (i < inside ? 0.5 : i % 2 ? 0.01 : 0.99));
    expect(classifySpread(pits(80)).class).toBe('under-dispersive');
    expect(classifySpread(pits(95)).class).toBe('calibrated');
    expect(classifySpread(pits(85)).class).toBe('calibrated');
    expect(classifySpread(pits(83)).class).toBe('under-dispersive');
    expect(classifySpread(pits(100)).class).toBe('over-dispersive');
    expect(classifySpread(pits(100)).tolerance).toBeCloseTo(0.06, 12);
    expect(classifySpread([]).class).toBeNull();
  });

  it('quantile ensemble: 1000 midpoint quantiles of N(μ, σ²) score like the Gaussian closed form (properscoring 0.1 test_crps.py test_crps_gaussian_consistent; Gneiting et al. 2005)', () => {
    expect(isMidpointGrid(midpointProbs(4))).toBe(true);
    expect(Array.from(midpointProbs(4))).toEqual([0.125, 0.375, 0.625, 0.875]);
    expect(isMidpointGrid([0.05, 0.5, 0.95])).toBe(false);
    const probs = midpointProbs(1000);
    const z = Float64Array.from(probs, (p) => normalQuantile(p));
    const g = createPrng(3);
    const cases: VerificationCase[] = [];
    let closed = 0;
    for (let i = 0; i < 50; i++) {
      const mu = 20 + i;
      const sd = 2 + (i % 5);
      const y = mu + sd * g.normal();
      closed += crpsGaussian(mu, sd, y);
      const values = Float64Array.from(z, (v) => mu + sd * v);
      cases.push({ lead: 0, observation: y, raw: values, corrected: values, stochasticQuantiles: { probs, values } });
    }
    const r = compareForecasts(cases);
    expect(r.stochasticFrom).toBe('quantiles');
    expect(Math.abs(r.stochastic!.crps.crps! / (closed / 50) - 1)).toBeLessThan(1e-4);
    const bad = [{ ...cases[0], stochasticQuantiles: { probs: [0.05, 0.5, 0.95], values: [1, 2, 3] } }];
    expect(() => compareForecasts(bad)).toThrow(/midpoint levels/);
  });
});
