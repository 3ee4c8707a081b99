import { describe, expect, it } from 'vitest';
import { brierDecomposition, brierScores } from '../../src/core/scores/brier.ts';
import { createPrng } from '../../src/core/prng.ts';

describe('Brier score and Murphy (1973) decomposition', () => {
  it('properscoring 0.1 tests/test_brier.py threshold examples, with our event "value > threshold"', () => {
    // properscoring uses the event "value ≤ threshold". Our event is its complement, so each
    // (p − o)² is unchanged and the published values carry over: obs 0, members [−1, 1],
    // thresholds [−2, 0, 2] → [0, 0.25, 0]; obs 0, members [0, 0, 0, 1], threshold 0 → 0.0625.
    const r = brierScores([-1, 1], [0], 2, [-2, 0, 2]);
    expect(r.map((x) => x.brier)).toEqual([0, 0.25, 0]);
    // Direction matters at the tie: members equal to the threshold do not exceed it, so p = 1/4 here
    // (properscoring: P(value ≤ 0) = 3/4 with the event happening).
    expect(brierScores([0, 0, 0, 1], [0], 4, [0])[0].brier).toBeCloseTo(0.0625, 15);
  });

  it('probability 0.271 for an event that did not happen → 0.271² = 0.073441 (worked by hand from the Brier 1950 definition)', () => {
    expect(brierDecomposition([0.271], [0]).brier).toBeCloseTo(0.073441, 15);
  });

  it('decomposition is exact for ensemble probabilities with nMembers + 1 bins', () => {
    const g = createPrng(17);
    const m = 10;
    const nCases = 3000;
    const ens = new Float64Array(nCases * m);
    const obs = new Float64Array(nCases);
    for (let c = 0; c < nCases; c++) {
      const centre = g.normal(0, 2);
      obs[c] = centre + g.normal();
      for (let j = 0; j < m; j++) ens[c * m + j] = centre + 0.3 + 0.7 * g.normal();
    }
    for (const r of brierScores(ens, obs, m, [-1, 0, 2])) {
      expect(Math.abs(r.reliability - r.resolution + r.uncertainty - r.brier)).toBeLessThan(1e-12);
      expect(r.bins.count.reduce((a, b) => a + b)).toBe(nCases);
    }
  });

  it('bins and reliability-diagram values by hand', () => {
    // p: 0.05, 0.15, 0.95, 0.95 with outcomes 0, 1, 1, 0 in 10 bins.
    const r = brierDecomposition([0.05, 0.15, 0.95, 0.95], [0, 1, true, false], 10);
    expect(r.bins.count[0]).toBe(1);
    expect(r.bins.count[1]).toBe(1);
    expect(r.bins.count[9]).toBe(2);
    expect(r.bins.observedFrequency[9]).toBe(0.5);
    expect(r.bins.meanForecast[9]).toBeCloseTo(0.95, 15);
    expect(Number.isNaN(r.bins.meanForecast[5])).toBe(true);
    expect(r.baseRate).toBe(0.5);
    expect(r.uncertainty).toBe(0.25);
    // reliability = (0.05² + 0.85² + 2·0.45²)/4, resolution = (0.25 + 0.25 + 0)/4
    expect(r.reliability).toBeCloseTo((0.0025 + 0.7225 + 2 * 0.2025) / 4, 14);
    expect(r.resolution).toBeCloseTo(0.125, 14);
    expect(r.brier).toBeCloseTo((0.0025 + 0.7225 + 0.0025 + 0.9025) / 4, 14);
    // One distinct forecast per bin, so the decomposition is exact here.
    expect(r.reliability - r.resolution + r.uncertainty).toBeCloseTo(r.brier, 14);
  });
});
