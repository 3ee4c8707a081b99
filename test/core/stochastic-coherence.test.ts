import { describe, expect, it } from 'vitest';
import { buildArchiveFromSeries, type ErrorArchive } from '../../src/core/stochastic/error-archive.ts';
import { kernelCumulative, kernelEffectiveSize } from '../../src/core/stochastic/knn.ts';
import { createPrng } from '../../src/core/prng.ts';
import { schaakeShuffle } from '../../src/core/stochastic/schaake.ts';
import { monteCarloStandardError, runStochasticStage } from '../../src/core/stochastic/stochastic-stage.ts';

/** Lead-free archive whose errors are a stationary AR(1) (φ, σ), independent of the flow (invented process). */
function ar1Archive(seed: number, S: number, phi: number, sigma: number, templateLength: number): ErrorArchive {
  const g = createPrng(seed);
  const innov = sigma * Math.sqrt(1 - phi * phi);
  const corrected = Float64Array.from({ length: S }, () => 60 + 80 * g.nextFloat());
  let e = sigma * g.normal();
  const observed = Float64Array.from(corrected, (c) => {
    e = phi * e + innov * g.normal();
    return c + e;
  });
  return buildArchiveFromSeries({ corrected, observed, dayOfYear: Array.from({ length: S }, () => 1), templateLength });
}

describe('member-coherent trajectories', () => {
  it('any-time exceedance with persistent member spread and AR(1) errors matches a brute-force Monte Carlo of the process', () => {
    // The process: pick one of five members (levels 80 … 120, persistent over the horizon), add an
    // AR(1) error path (φ = 0.9, σ = 8; Box & Jenkins, stationary AR(1)). P(max over 10 leads > 125) is
    // computed by brute force. The stage, given the members and an archive of that error process, must
    // reproduce it: each trajectory stays on one member and only its errors follow a template.
    const phi = 0.9;
    const sigma = 8;
    const H = 10;
    const levels = [80, 90, 100, 110, 120];
    const threshold = 125;
    const a = ar1Archive(41, 200000, phi, sigma, H);
    const members = Float64Array.from({ length: levels.length * H }, (_, i) => levels[Math.floor(i / H)]);
    const N = 8000;
    // Uniform kernel over k = √n neighbours: the marginal keeps (1 − 1/k) of the error variance.
    const r = runStochasticStage(a, { members, nMembers: levels.length, nLeads: H }, { seed: 9, nDraws: N, thresholds: [threshold], kernel: 'uniform', keepTrajectories: true });

    const g = createPrng(77);
    const innov = sigma * Math.sqrt(1 - phi * phi);
    const paths = 200000;
    let hits = 0;
    for (let p = 0; p < paths; p++) {
      const level = levels[p % levels.length];
      let e = sigma * g.normal();
      let m = e;
      for (let h = 1; h < H; h++) {
        e = phi * e + innov * g.normal();
        if (e > m) m = e;
      }
      if (level + m > threshold) hits++;
    }
    const truth = hits / paths;
    // Sampling error: stage √(p(1−p)/8000) ≈ 0.004 plus the templates' (8000 windows of a 200 000-step
    // series); reference ≈ 0.001. Bound 0.02 ≈ 4 SE.
    expect(truth).toBeGreaterThan(0.1);
    expect(Math.abs(r.exceedanceAnyTime[0] - truth)).toBeLessThan(0.02);
    // Every trajectory stays on its member: value − member level is an error path from the archive's
    // marginal, never a jump to another member's level.
    const tr = r.trajectories!;
    for (let j = 0; j < N; j += 97) {
      const level = levels[r.memberIndex[j]];
      for (let h = 0; h < H; h++) expect(Math.abs(tr[j * H + h] - level)).toBeLessThan(6 * sigma);
    }
    // The defect this replaces: shuffling the totals across members by the same templates makes
    // trajectories jump between members, and the any-time probability grows well above the truth.
    const leadMajor = new Float64Array(N * H);
    const template = new Float64Array(N * H);
    for (let j = 0; j < N; j++) {
      for (let h = 0; h < H; h++) {
        leadMajor[h * N + j] = tr[j * H + h];
        template[h * N + j] = a.templateValues[a.templateStart[r.templateIndex![j]] + h];
      }
    }
    const totals = schaakeShuffle(leadMajor, template, N, H);
    let jumpy = 0;
    for (let j = 0; j < N; j++) {
      let m = -Infinity;
      for (let h = 0; h < H; h++) m = Math.max(m, totals[h * N + j]);
      if (m > threshold) jumpy++;
    }
    // (seen here: 0.18 against 0.14; the SE of each is ≈ 0.004)
    expect(jumpy / N).toBeGreaterThan(truth + 0.03);
  });

  it('an archive of tied zero-flow cases gives the mix of all their errors, not the first ones stored', () => {
    // 400 cases at exactly 0 m³/s whose errors rise with their position in the archive (0.01 … 4.00),
    // plus 400 cases at higher flows. A member at 0 has 400 equidistant candidates; k = round(√800) = 28.
    // Taking them by position would always draw errors 0.01 … 0.28 (mean 0.145); at random, the draws'
    // mean is the tied cases' mean, 2.005.
    const tied = 400;
    const corrected = [...Array.from({ length: tied }, () => 0), ...Array.from({ length: tied }, (_, i) => 10 + i)];
    const observed = corrected.map((c, i) => (i < tied ? 0.01 * (i + 1) : c));
    const a = buildArchiveFromSeries({ corrected, observed, dayOfYear: corrected.map(() => 1), templateLength: 1 });
    const H = 40;
    const r = runStochasticStage(a, { members: new Float64Array(H), nMembers: 1, nLeads: H }, { seed: 3, nDraws: 500, shuffle: false, keepTrajectories: true });
    expect(r.kPerLead[0]).toBe(28);
    const tr = Array.from(r.trajectories!);
    const mean = tr.reduce((s, v) => s + v, 0) / tr.length;
    // Each lead draws a fresh random 28 of the 400: 40 leads × 28 cases; SD of the tied errors is
    // 1.15, so the mean of 40 × 28 cases has SE ≈ 0.035 (plus kernel weighting): bound 0.3.
    expect(Math.abs(mean - 2.005)).toBeLessThan(0.3);
    expect(new Set(tr).size).toBeGreaterThan(250);
    expect(Math.max(...tr)).toBeGreaterThan(3.5);
  });
});

describe('template gaps', () => {
  it('a daily archive with one observation in 50 missing still gives templates of length 240, and runs of 240 leads work', () => {
    const S = 3000;
    const g = createPrng(5);
    const corrected = Float64Array.from({ length: S }, (_, i) => 20 + 10 * Math.sin(i / 30));
    const observed: (number | null)[] = Array.from(corrected, (c) => (g.nextFloat() < 0.02 ? null : c * Math.exp(0.2 * g.normal())));
    const a = buildArchiveFromSeries({ corrected, observed, dayOfYear: Array.from({ length: S }, (_, i) => (i % 365) + 1), templateLength: 240, transform: { kind: 'log', offset: 0.1 } });
    // With complete windows only, P(240 days without a gap) = 0.98^240 ≈ 0.008: a handful at best.
    // At most 24 missing per window (10 %) keeps nearly every window.
    expect(a.templateStart.length).toBeGreaterThan(2500);
    for (let t = 0; t < a.templateStart.length; t += 50) {
      for (let h = 0; h < 240; h++) expect(Number.isFinite(a.templateValues[a.templateStart[t] + h])).toBe(true);
    }
    // A filled value lies between its present neighbours (linear interpolation).
    const missing = observed.findIndex((v, i) => v === null && i > 1 && observed[i - 1] !== null && observed[i + 1] !== null);
    const lo = Math.min(a.templateValues[missing - 1], a.templateValues[missing + 1]);
    const hi = Math.max(a.templateValues[missing - 1], a.templateValues[missing + 1]);
    expect(a.templateValues[missing]).toBeGreaterThanOrEqual(lo);
    expect(a.templateValues[missing]).toBeLessThanOrEqual(hi);
    // Missing observations are never kNN cases.
    expect(a.predictor.length).toBe(observed.filter((v) => v !== null).length);
    const r = runStochasticStage(a, { members: new Float64Array(3 * 240).fill(25), nMembers: 3, nLeads: 240 }, { seed: 1, nDraws: 300 });
    expect(r.quantiles.every((q) => Number.isFinite(q) && q >= 0)).toBe(true);
  });
});

describe('the stage keeps the centre', () => {
  it('with errors of zero median at every flow the stochastic median stays at the corrected median', () => {
    // Log-space errors N(0, 0.3²) independent of flow (invented process): the median of x·exp(e) is x,
    // so each lead's stochastic median should equal the members' median. (In log space the mean does
    // rise, by E exp(e) = exp(σ²/2) ≈ 1.046 — the right mean for multiplicative errors.)
    const g = createPrng(8);
    const S = 20000;
    const corrected = Float64Array.from({ length: S }, () => 5 + 300 * g.nextFloat());
    const observed = Float64Array.from(corrected, (c) => c * Math.exp(0.3 * g.normal()));
    const a = buildArchiveFromSeries({ corrected, observed, dayOfYear: Array.from({ length: S }, () => 1), templateLength: 20, transform: { kind: 'log', offset: 0.01 } });
    const H = 20;
    const M = 21;
    const members = Float64Array.from({ length: M * H }, (_, i) => 40 + 200 * ((i % H) / H) + 2 * (Math.floor(i / H) - 10));
    const r = runStochasticStage(a, { members, nMembers: M, nLeads: H }, { seed: 2, nDraws: 4000, probs: [0.5] });
    let meanLogRatio = 0;
    for (let h = 0; h < H; h++) {
      const centre = 40 + 200 * (h / H); // the members' median
      const logRatio = Math.log(r.quantiles[h] / centre);
      meanLogRatio += logRatio / H;
      // One lead's median rests on ~16 effective neighbours per member (Lall & Sharma kernel) × 21
      // members: SE ≈ 1.25·0.3/√336 ≈ 0.02 in log; bound 3 SE.
      expect(Math.abs(logRatio)).toBeLessThan(0.06);
    }
    // Over 20 leads (different neighbours each): SE ≈ 0.005; bound 3 SE.
    expect(Math.abs(meanLogRatio)).toBeLessThan(0.015);
  });
});

describe('sampling error of the probabilities', () => {
  it('the reported standard error √(p(1−p)/N) matches the spread of the probability over seeds', () => {
    const a = ar1Archive(3, 5000, 0.8, 5, 6);
    const N = 400;
    const spread = (nMembers: number): { sd: number; reported: number; sdLead: number; reportedLead: number } => {
      const input = { members: Float64Array.from({ length: nMembers * 6 }, (_, i) => 95 + Math.floor(i / 6) * 5), nMembers, nLeads: 6 };
      const p: number[] = [];
      const pLead: number[] = [];
      let reported = 0;
      let reportedLead = 0;
      for (let seed = 1; seed <= 60; seed++) {
        const r = runStochasticStage(a, input, { seed, nDraws: N, thresholds: [104] });
        p.push(r.exceedanceAnyTime[0]);
        pLead.push(r.exceedance[3]);
        reported += r.exceedanceAnyTimeStandardError[0] / 60;
        reportedLead += r.exceedanceStandardError[3] / 60;
        expect(r.exceedanceAnyTimeStandardError[0]).toBeCloseTo(monteCarloStandardError(r.exceedanceAnyTime[0], N), 15);
      }
      const sdOf = (x: number[]) => {
        const m = x.reduce((s, v) => s + v, 0) / x.length;
        return Math.sqrt(x.reduce((s, v) => s + (v - m) ** 2, 0) / (x.length - 1));
      };
      return { sd: sdOf(p), reported, sdLead: sdOf(pLead), reportedLead };
    };
    // One member: the draws are independent given the neighbours, so the binomial formula is the
    // sampling error. The SD of an SD from 60 samples is ~9 %: bounds 0.75 … 1.3.
    const one = spread(1);
    expect(one.sdLead / one.reportedLead).toBeGreaterThan(0.75);
    expect(one.sdLead / one.reportedLead).toBeLessThan(1.3);
    expect(one.sd / one.reported).toBeGreaterThan(0.75);
    expect(one.sd / one.reported).toBeLessThan(1.3);
    // Several members: draws are dealt to members evenly (stratified), so the binomial figure is an
    // upper bound on the sampling error.
    const three = spread(3);
    expect(three.sd / three.reported).toBeLessThan(1.2);
  });
});

describe('neighbour kernels', () => {
  it('effective sample sizes: uniform k, Lall & Sharma 1/j ≈ 16 at k = 100, rank-Gaussian between', () => {
    // 1/Σp² with p_j = (1/j)/H_k: for k = 100, Σ(1/j²) ≈ 1.6350 and H_100 ≈ 5.1874 (both by hand
    // from the series), so 1/Σp² = 5.1874² / 1.6350 ≈ 16.46.
    expect(kernelEffectiveSize('lall-sharma', 100)).toBeCloseTo(16.46, 1);
    expect(kernelEffectiveSize('uniform', 100)).toBeCloseTo(100, 9);
    const gauss = kernelEffectiveSize('rank-gaussian', 100);
    expect(gauss).toBeGreaterThan(16.46);
    expect(gauss).toBeLessThan(100);
    const c = kernelCumulative('lall-sharma', 3);
    expect(c[0] / c[2]).toBeCloseTo(6 / 11, 15); // Lall & Sharma (1996) weights for k = 3
  });
});
