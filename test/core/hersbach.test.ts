import { describe, expect, it } from 'vitest';
import { hersbachDecomposition } from '../../src/core/scores/hersbach.ts';
import { createPrng } from '../../src/core/prng.ts';

function randomCases(seed: number, nCases: number, m: number, bias: number, spread: number) {
  const g = createPrng(seed);
  const ens = new Float64Array(nCases * m);
  const obs = new Float64Array(nCases);
  for (let c = 0; c < nCases; c++) {
    const centre = g.normal(0, 2);
    obs[c] = centre + g.normal();
    for (let j = 0; j < m; j++) ens[c * m + j] = centre + bias + spread * g.normal();
  }
  return { ens, obs };
}

describe('Hersbach (2000) CRPS decomposition', () => {
  it('worked by hand from the definitions of Hersbach (2000): members [0,2], y = 1 and y = 3', () => {
    // Bin 1: ᾱ = 1.5, β̄ = 0.5 → ḡ = 2, ō = 0.25; bin 2 (upper outlier): ᾱ = 0.5, ō_2 = 0.5 → ḡ = 1;
    // bin 0 empty. reliability = 2·(0.25−0.5)² + 1·(0.5−1)² = 0.375; potential = 2·0.25·0.75 + 1·0.5·0.5 = 0.625;
    // CRPS = (0.5 + 1.5)/2 = 1; uncertainty = |1 − 3|/2² = 0.5.
    const d = hersbachDecomposition([0, 2, 0, 2], [1, 3], 2);
    expect(d.reliability).toBeCloseTo(0.375, 14);
    expect(d.potential).toBeCloseTo(0.625, 14);
    expect(d.crps).toBeCloseTo(1, 14);
    expect(d.uncertainty).toBeCloseTo(0.5, 14);
    expect(d.resolution).toBeCloseTo(-0.125, 14);
    expect(Array.from(d.g)).toEqual([0, 2, 1]);
    expect(Array.from(d.o)).toEqual([0, 0.25, 0.5]);
  });

  it('lower outlier: ḡ_0 = β̄_0/ō_0 with ō_0 = mean 1{y ≤ x_1} (Hersbach 2000, outlier bins; worked by hand)', () => {
    // Cases: y = −1 below [0, 2] (β_0 = 1), y = 0 equal to x_1 (β_0 = 0, counts in ō_0), y = 1 inside.
    const d = hersbachDecomposition([0, 2, 0, 2, 0, 2], [-1, 0, 1], 2);
    expect(d.o[0]).toBeCloseTo(2 / 3, 14);
    expect(d.g[0]).toBeCloseTo(1 / 3 / (2 / 3), 14);
    // The observation equal to a member keeps its bin: bin 1 gets β = 2 from it (width clipping).
    expect(d.g[1]).toBeCloseTo(2, 14);
    expect(d.reliability + d.potential).toBeCloseTo(d.crps, 13);
  });

  it.each([
    [1, 0, 1],
    [2, 1.5, 1],
    [3, 0, 0.3],
    [4, 0, 3],
  ])('identity CRPS = reliability + potential to rounding (seed %i, bias %s, spread %s)', (seed, bias, spread) => {
    const { ens, obs } = randomCases(seed, 500, 10, bias, spread);
    const d = hersbachDecomposition(ens, obs, 10);
    expect(Math.abs(d.reliability + d.potential - d.crps)).toBeLessThan(1e-12 * d.crps);
    expect(d.reliability).toBeGreaterThanOrEqual(0);
  });

  it('a calibrated ensemble has a much smaller reliability part than a biased or too narrow one', () => {
    const good = hersbachDecomposition(...(Object.values(randomCases(5, 2000, 20, 0, 1)) as [Float64Array, Float64Array]), 20);
    const biased = hersbachDecomposition(...(Object.values(randomCases(5, 2000, 20, 1.5, 1)) as [Float64Array, Float64Array]), 20);
    const narrow = hersbachDecomposition(...(Object.values(randomCases(5, 2000, 20, 0, 0.2)) as [Float64Array, Float64Array]), 20);
    expect(good.reliability).toBeLessThan(0.02 * good.crps);
    expect(biased.reliability).toBeGreaterThan(10 * good.reliability);
    expect(narrow.reliability).toBeGreaterThan(10 * good.reliability);
  });

  it('skips missing observations', () => {
    const d = hersbachDecomposition([0, 2, 5, 6, 0, 2], [1, null, 3], 2);
    expect(d.n).toBe(2);
    expect(d.crps).toBeCloseTo(1, 14);
  });
});
