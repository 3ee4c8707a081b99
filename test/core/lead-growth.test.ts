import { describe, expect, it } from 'vitest';
import { buildArchiveFromSeries } from '../../src/core/stochastic/error-archive.ts';
import { leadGrowthScale } from '../../src/core/stochastic/lead-growth.ts';
import { createPrng } from '../../src/core/prng.ts';
import { runStochasticStage } from '../../src/core/stochastic/stochastic-stage.ts';

describe('error growth with lead time for lead-free archives', () => {
  it('g_h = √(1 + max(0, F_h − V̄)/V_m), worked by hand', () => {
    // V_m = 2, V̄ = 1.05, F = [1.05, 1.55, 3.05, 0.9]: τ² = 0, 0.5, 2, 0 → g = 1, √1.25, √2, 1.
    const g = leadGrowthScale({ memberErrorVariance: 2, meanErrorVariance: 1.05, forecastMeanErrorVariance: [1.05, 1.55, 3.05, 0.9] });
    expect(Array.from(g)).toEqual([1, Math.sqrt(1.25), Math.sqrt(2), 1]);
    expect(() => leadGrowthScale({ memberErrorVariance: 0, meanErrorVariance: 1, forecastMeanErrorVariance: [1] })).toThrow(/memberErrorVariance/);
  });

  it('the stage scales the drawn errors per lead, so additive bands widen by g_h and the variance grows by τ_h²', () => {
    const g = createPrng(4);
    const S = 20000;
    const corrected = Float64Array.from({ length: S }, () => 40 + 20 * g.nextFloat());
    const observed = Float64Array.from(corrected, (c) => c + 2 * g.normal());
    const a = buildArchiveFromSeries({ corrected, observed, dayOfYear: Array.from({ length: S }, () => 1), templateLength: 3 });
    const input = { members: [50, 50, 50], nMembers: 1, nLeads: 3 };
    const opts = { seed: 2, nDraws: 20000, probs: [0.05, 0.95], kernel: 'uniform' as const };
    const plain = runStochasticStage(a, input, opts);
    a.leadScale = Float64Array.from([1, 1.5]); // lead 3 takes the last factor
    const grown = runStochasticStage(a, input, opts);
    const width = (r: typeof plain, h: number) => r.quantiles[2 * h + 1] - r.quantiles[2 * h];
    expect(width(grown, 0)).toBeCloseTo(width(plain, 0), 10);
    // Same neighbours and draws: every error is multiplied by 1.5 exactly, so the band is too.
    expect(width(grown, 1) / width(plain, 1)).toBeCloseTo(1.5, 6);
    expect(width(grown, 2) / width(plain, 2)).toBeCloseTo(1.5, 6);
  });
});
