import { describe, expect, it } from 'vitest';
import { dressedArchiveFromRuns } from '../../src/core/stochastic/ensemble-dressing.ts';
import { buildArchiveFromReforecasts, type ErrorArchive } from '../../src/core/stochastic/error-archive.ts';
import { createPrng } from '../../src/core/prng.ts';
import { runStochasticStage } from '../../src/core/stochastic/stochastic-stage.ts';

// A calibrated synthetic ensemble (invented process): per issue and lead a centre μ ~ U(30, 90); the
// observation and each of M members are independent draws from N(μ, 4²), so the observation is
// exchangeable with the members: the usual definition of a reliable ensemble (Hamill 2001, from memory).
const M = 20;
const H = 3;
const SD = 4;

function runs(seed: number, nIssues: number) {
  const g = createPrng(seed);
  const members = new Float64Array(nIssues * M * H);
  const observed = new Float64Array(nIssues * H);
  for (let is = 0; is < nIssues; is++) {
    for (let h = 0; h < H; h++) {
      const mu = 30 + 60 * g.nextFloat();
      observed[is * H + h] = mu + SD * g.normal();
      for (let i = 0; i < M; i++) members[(is * M + i) * H + h] = mu + SD * g.normal();
    }
  }
  return { nIssues, members, observed, dayOfYear: new Array(nIssues * H).fill(100) };
}

/** Share of new observations inside the stage's 5–95 % band, issue by issue. */
function coverage(archive: ErrorArchive, seed: number): number {
  const fresh = runs(seed, 600);
  let inside = 0;
  let n = 0;
  for (let is = 0; is < fresh.nIssues; is++) {
    const r = runStochasticStage(archive, { members: fresh.members.subarray(is * M * H, (is + 1) * M * H), nMembers: M, nLeads: H }, { seed: is + 1, nDraws: 400, probs: [0.05, 0.95] });
    for (let h = 0; h < H; h++) {
      const y = fresh.observed[is * H + h];
      if (y >= r.quantiles[2 * h] && y <= r.quantiles[2 * h + 1]) inside++;
      n++;
    }
  }
  return inside / n;
}

describe('dressing past runs without counting the spread twice', () => {
  const past = runs(1, 3000);

  it('a calibrated ensemble stays calibrated: the nominal 90 % band covers 88–92 %', () => {
    const { archive, dressing } = dressedArchiveFromRuns({ nIssues: past.nIssues, nMembers: M, nLeads: H, members: past.members, observed: past.observed, dayOfYear: past.dayOfYear });
    // Expected shrink factor, by hand from the variances: Var(y − x̄) = σ²(1 + 1/M); mean ensemble
    // variance with divisor M = σ²(M − 1)/M; so f² = (2/M)/(1 + 1/M) = 2/(M + 1), f = 0.309.
    for (const l of dressing.byLead) expect(Math.abs(l.factor - Math.sqrt(2 / (M + 1)))).toBeLessThan(0.05);
    expect(archive.nLeads).toBe(H);
    expect(archive.predictor.length).toBe(3000 * H); // one case per issue and lead: the ensemble mean
    // 1800 issue-leads, binomial SE ≈ 0.007 (issues independent): 88–92 % is about ±3 SE.
    const c = coverage(archive, 2);
    expect(c).toBeGreaterThan(0.88);
    expect(c).toBeLessThan(0.92);
  });

  it('dressing every member with member errors (as before) over-covers the same ensemble', () => {
    // Each issue × member as a row of its own: each member's error holds the spread already.
    const rows = past.nIssues * M;
    const corrected = new Float64Array(rows * H);
    const observed = new Float64Array(rows * H);
    const dayOfYear = new Array(rows * H).fill(100);
    for (let is = 0; is < past.nIssues; is++) {
      for (let i = 0; i < M; i++) {
        for (let h = 0; h < H; h++) {
          corrected[(is * M + i) * H + h] = past.members[(is * M + i) * H + h];
          observed[(is * M + i) * H + h] = past.observed[is * H + h];
        }
      }
    }
    const a = buildArchiveFromReforecasts({ nIssues: rows, nLeads: H, corrected, observed, dayOfYear });
    // Predictive variance ≈ σ² (members) + 2σ² (member errors) = 3σ²: the 90 % band covers ~99.6 %.
    const old = coverage(a, 2);
    expect(old).toBeGreaterThan(0.97);
  });
});
