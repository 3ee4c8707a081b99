import { describe, expect, it } from 'vitest';
import { archiveFromBytes, archiveToBytes } from '../../src/core/stochastic/archive-codec.ts';
import { archiveFromErrorMatrix, archiveStrata } from '../../src/core/stochastic/error-archive.ts';
import { createPrng } from '../../src/core/prng.ts';
import { runStochasticStage } from '../../src/core/stochastic/stochastic-stage.ts';

// Invented process: past runs whose remaining error at lead 1 has a spread that grows with the
// size of the error at issue time, sd = 0.5 + |e₀| (e₀ ~ N(0, 1)), independent of the flow.
function pastRuns(seed: number, nIssues: number) {
  const g = createPrng(seed);
  const H = 2;
  const predictor = new Float64Array(nIssues * H);
  const error = new Float64Array(nIssues * H);
  const issueError = new Float64Array(nIssues);
  for (let i = 0; i < nIssues; i++) {
    const e0 = g.normal();
    issueError[i] = e0;
    for (let h = 0; h < H; h++) {
      predictor[i * H + h] = 20 + 60 * g.nextFloat();
      error[i * H + h] = (0.5 + Math.abs(e0)) * g.normal();
    }
  }
  return archiveFromErrorMatrix({ nIssues, nLeads: H, predictor, error, dayOfYear: new Array(nIssues * H).fill(1), transform: { kind: 'none' }, issueError, strata: 5 });
}

describe('the stochastic stage conditioned on the issue-time error', () => {
  const archive = pastRuns(1, 5000);

  it('splits each lead into issue-error strata at the quintiles, and keeps them through storage', () => {
    expect(archiveStrata(archive)).toBe(5);
    // Quintiles of N(0, 1): ±0.8416, ±0.2533 (scipy.stats.norm.ppf, python3-scipy 1.10.1); sample of 5000.
    const want = [-0.8416, -0.2533, 0.2533, 0.8416];
    archive.issueErrorEdges!.forEach((e, j) => expect(Math.abs(e - want[j])).toBeLessThan(0.08));
    const back = archiveFromBytes(archiveToBytes(archive));
    expect(Array.from(back.issueErrorEdges!)).toEqual(Array.from(archive.issueErrorEdges!));
    expect(Array.from(back.groupStart)).toEqual(Array.from(archive.groupStart));
  });

  it('with the same corrected value, the lead-1 band is narrower when the issue error is small than when large', () => {
    const band = (issueError: number) => {
      const r = runStochasticStage(archive, { members: [50, 50], nMembers: 1, nLeads: 2, issueError: [issueError] }, { seed: 3, nDraws: 4000, probs: [0.05, 0.95] });
      return r.quantiles[1] - r.quantiles[0];
    };
    const small = band(0);
    const large = band(2.5);
    // Middle quintile: |e₀| < 0.25, sd ≈ 0.6; top quintile: e₀ > 0.84, E sd ≈ 0.5 + 1.4 = 1.9 (by hand):
    // the 5–95 % widths are about 2·1.645·0.6 ≈ 2 and well over 5.
    expect(small).toBeLessThan(2.6);
    expect(large).toBeGreaterThan(4.5);
    // Without a known issue error the middle stratum serves.
    const unknown = runStochasticStage(archive, { members: [50, 50], nMembers: 1, nLeads: 2 }, { seed: 3, nDraws: 4000, probs: [0.05, 0.95] });
    expect(unknown.quantiles[1] - unknown.quantiles[0]).toBeCloseTo(small, 6);
  });

  it('refuses an issue error per member of the wrong length', () => {
    expect(() => runStochasticStage(archive, { members: [50, 50, 50, 50], nMembers: 2, nLeads: 2, issueError: [0] }, { seed: 1 })).toThrow(/issueError/);
  });
});

describe('an issue-time observation some steps old', () => {
  // Invented per-lead archive: the error's sd at lead h (0-based) is h + 1, so the 5–95 % band of
  // N(0, (h + 1)²) is 2·1.645·(h + 1) wide (normal quantile 1.6449, scipy.stats.norm.ppf(0.95), python3-scipy 1.10.1).
  const H = 4;
  const g = createPrng(7);
  const nIssues = 4000;
  const predictor = new Float64Array(nIssues * H);
  const error = new Float64Array(nIssues * H);
  for (let i = 0; i < nIssues * H; i++) {
    predictor[i] = 20 + 60 * g.nextFloat();
    error[i] = ((i % H) + 1) * g.normal();
  }
  const archive = archiveFromErrorMatrix({ nIssues, nLeads: H, predictor, error, dayOfYear: new Array(nIssues * H).fill(1), transform: { kind: 'none' } });
  const widths = (leadOffset: number | undefined) => {
    const r = runStochasticStage(archive, { members: [50, 50, 50], nMembers: 1, nLeads: 3, ...(leadOffset === undefined ? {} : { leadOffset }) }, { seed: 5, nDraws: 6000, probs: [0.05, 0.95], shuffle: false, k: 2000, kernel: 'uniform' });
    return [0, 1, 2].map((h) => r.quantiles[h * 2 + 1] - r.quantiles[h * 2]);
  };

  it('draws lead h from the archive lead h + age, the last lead past the end', () => {
    // 2000 equally weighted neighbours: within 8 % (neighbouring leads differ by 25–100 %).
    const near = (w: number, sd: number) => expect(Math.abs(w / (2 * 1.6449 * sd) - 1)).toBeLessThan(0.08);
    const fresh = widths(undefined);
    fresh.forEach((w, h) => near(w, h + 1));
    const twoOld = widths(2);
    // Lead 0 of a run updated on a 2-step-old observation is lead 2 from it; leads 1, 2 pass the end (lead 3).
    near(twoOld[0], 3);
    near(twoOld[1], 4);
    near(twoOld[2], 4);
  });

  it('refuses a negative or fractional age', () => {
    expect(() => runStochasticStage(archive, { members: [50, 50, 50], nMembers: 1, nLeads: 3, leadOffset: -1 }, { seed: 1, shuffle: false })).toThrow(/leadOffset/);
    expect(() => runStochasticStage(archive, { members: [50, 50, 50], nMembers: 1, nLeads: 3, leadOffset: 0.5 }, { seed: 1, shuffle: false })).toThrow(/leadOffset/);
  });
});
