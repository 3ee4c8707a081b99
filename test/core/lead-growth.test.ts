import { describe, expect, it } from 'vitest';
import { archiveFromErrorMatrix, buildArchiveFromSeries } from '../../src/core/stochastic/error-archive.ts';
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
    // The walk for both (the uniform kernel's window shortcut, which has its own draws, is not used with a lead scale).
    const opts = { seed: 2, nDraws: 20000, probs: [0.05, 0.95], kernel: 'uniform' as const, walkNeighbours: true };
    const plain = runStochasticStage(a, input, opts);
    a.leadScale = Float64Array.from([1, 1.5]); // lead 3 takes the last factor
    const grown = runStochasticStage(a, input, opts);
    const width = (r: typeof plain, h: number) => r.quantiles[2 * h + 1] - r.quantiles[2 * h];
    expect(width(grown, 0)).toBeCloseTo(width(plain, 0), 10);
    // Same neighbours and draws: every error is multiplied by 1.5 exactly, so the band is too.
    expect(width(grown, 1) / width(plain, 1)).toBeCloseTo(1.5, 6);
    expect(width(grown, 2) / width(plain, 2)).toBeCloseTo(1.5, 6);
  });

  it('widens the errors about their neighbours\' mean, so biased errors keep their centre', () => {
    // Invented: the archive's errors are 3 + 2·N(0, 1), a bias the residual model left. A forecast-forcing
    // error adds spread, not bias, so the grown band's median stays at 50 + 3 (old behaviour: 50 + 2·3).
    const g = createPrng(9);
    const S = 20000;
    const corrected = Float64Array.from({ length: S }, () => 40 + 20 * g.nextFloat());
    const observed = Float64Array.from(corrected, (c) => c + 3 + 2 * g.normal());
    const a = buildArchiveFromSeries({ corrected, observed, dayOfYear: Array.from({ length: S }, () => 1), templateLength: 2 });
    a.leadScale = Float64Array.from([1, 2]);
    const r = runStochasticStage(a, { members: [50, 50], nMembers: 1, nLeads: 2 }, { seed: 2, nDraws: 20000, probs: [0.05, 0.5, 0.95], kernel: 'uniform' });
    expect(r.quantiles[1]).toBeCloseTo(53, 0);
    expect(r.quantiles[4]).toBeCloseTo(53, 0);
    // 5–95 % width 2·1.645·σ: σ = 2 at lead 1, 4 at lead 2 (normal quantile from scipy.stats.norm.ppf, python3-scipy 1.10.1).
    expect((r.quantiles[2] - r.quantiles[0]) / (2 * 1.6449 * 2)).toBeCloseTo(1, 1);
    expect((r.quantiles[5] - r.quantiles[3]) / (2 * 1.6449 * 4)).toBeCloseTo(1, 1);
  });

  it('per-lead archives (pseudo-forecasts after updating) take the scale of the archive lead they draw from', () => {
    const g = createPrng(11);
    const n = 6000;
    const H = 3;
    const predictor = Float64Array.from({ length: n * H }, () => 40 + 20 * g.nextFloat());
    const error = Float64Array.from({ length: n * H }, () => g.normal());
    const a = archiveFromErrorMatrix({ nIssues: n, nLeads: H, predictor, error, dayOfYear: new Array(n * H).fill(1), transform: { kind: 'none' } });
    a.leadScale = Float64Array.from([1, 2, 3]);
    const width = (leadOffset: number) => {
      const r = runStochasticStage(a, { members: [50], nMembers: 1, nLeads: 1, leadOffset }, { seed: 3, nDraws: 20000, probs: [0.05, 0.95], kernel: 'uniform', k: 3000, shuffle: false });
      return (r.quantiles[1] - r.quantiles[0]) / (2 * 1.6449);
    };
    expect(width(0)).toBeCloseTo(1, 1);
    expect(width(1) / 2).toBeCloseTo(1, 1);
    expect(width(2) / 3).toBeCloseTo(1, 1);
  });
});
