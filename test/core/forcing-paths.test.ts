import { describe, expect, it } from 'vitest';
import { archiveFromBytes, archiveFromJSON, archiveToBytes, archiveToJSON } from '../../src/core/stochastic/archive-codec.ts';
import { buildArchiveFromSeries, type ErrorArchive } from '../../src/core/stochastic/error-archive.ts';
import { drawForcingPaths, forcingDeviationPaths, pathCount, type ForcingPaths } from '../../src/core/stochastic/forcing-paths.ts';
import { createPrng } from '../../src/core/prng.ts';
import { runStochasticStage } from '../../src/core/stochastic/stochastic-stage.ts';

describe('forecast-forcing deviation paths from past runs', () => {
  it('δ_h = mean over members of T(simulated) − T(forecast); a run with a lead no member has is left out (worked by hand)', () => {
    // 3 issues × 2 members × 2 leads, log transform with offset 1.
    const e = Math.E;
    const forecast = [
      [e - 1, e - 1], [e * e - 1, e - 1], // issue 0: members 0, 1
      [1, 2], [NaN, NaN], // issue 1: member 1 has nothing
      [5, NaN], [NaN, NaN], // issue 2: lead 1 missing for both members
    ].flat();
    const simulated = [
      [e * e - 1, e - 1], [e * e - 1, e * e * e - 1],
      [1, 2], [3, 3],
      [5, 5], [5, 5],
    ].flat();
    const p = forcingDeviationPaths({ forecast, simulated, nIssues: 3, nMembers: 2, nLeads: 2, transform: { kind: 'log', offset: 1 } });
    expect(p.nLeads).toBe(2);
    expect(pathCount(p)).toBe(2);
    // Issue 0: lead 0 δ = mean(2 − 1, 2 − 2) = 0.5; lead 1 δ = mean(1 − 1, 3 − 1) = 1.
    expect(p.values[0]).toBeCloseTo(0.5, 12);
    expect(p.values[1]).toBeCloseTo(1, 12);
    // Issue 1: member 0 only, δ = 0 at both leads.
    expect(p.values[2]).toBe(0);
    expect(p.values[3]).toBe(0);
  });

  it('each trajectory gets one path, uniformly over all of them (seeded)', () => {
    const P = 5;
    const paths: ForcingPaths = { nLeads: 1, values: new Float64Array(P) };
    const got = drawForcingPaths(paths, 50_000, createPrng(1));
    const counts = new Array(P).fill(0);
    for (const p of got) counts[p]++;
    // Each of 5 has 10,000 expected; binomial sd ≈ 89, so ±400 is > 4 sd (common practice).
    for (const c of counts) expect(Math.abs(c - 10_000)).toBeLessThan(400);
    expect(Array.from(drawForcingPaths(paths, 20, createPrng(7)))).toEqual(Array.from(drawForcingPaths(paths, 20, createPrng(7))));
  });

  it('archives keep their paths through bytes and JSON, and refuse broken ones', () => {
    const a = smallArchive();
    a.forcingPaths = { nLeads: 2, values: Float64Array.from([0.1, 0.2, -0.3, 0.4]) };
    for (const back of [archiveFromBytes(archiveToBytes(a)), archiveFromJSON(archiveToJSON(a))]) {
      expect(back.forcingPaths!.nLeads).toBe(2);
      expect(Array.from(back.forcingPaths!.values)).toEqual([0.1, 0.2, -0.3, 0.4]);
    }
    a.forcingPaths = { nLeads: 2, values: Float64Array.from([0.1, NaN, 0, 0]) };
    expect(() => archiveFromJSON(archiveToJSON(a))).toThrow(/forcing paths/);
    a.forcingPaths = { nLeads: 2, values: Float64Array.from([0.1, 0.2, 0.3]) };
    expect(() => archiveFromJSON(archiveToJSON(a))).toThrow(/whole number/);
  });
});

function smallArchive(): ErrorArchive {
  const g = createPrng(3);
  const corrected = Float64Array.from({ length: 400 }, () => 40 + 20 * g.nextFloat());
  return buildArchiveFromSeries({ corrected, observed: corrected.slice(), dayOfYear: new Array(400).fill(1), templateLength: 3 });
}

describe('the stage with forcing paths', () => {
  it('adds one whole path to each trajectory: with zero archived errors, trajectory = member + its path at every lead', () => {
    const a = smallArchive(); // every archived error is 0
    // Two paths: +2 at every lead, and −1, −2, −3.
    a.forcingPaths = { nLeads: 3, values: Float64Array.from([2, 2, 2, -1, -2, -3]) };
    a.leadScale = Float64Array.from([1, 5, 9]); // ignored where paths serve
    const r = runStochasticStage(a, { members: [50, 50, 50], nMembers: 1, nLeads: 3 }, { seed: 4, nDraws: 4000, thresholds: [51], keepTrajectories: true, probs: [0.5] });
    const up = [52, 52, 52];
    const down = [49, 48, 47];
    let nUp = 0;
    for (let j = 0; j < 4000; j++) {
      const want = r.pathIndex![j] === 0 ? up : down;
      if (r.pathIndex![j] === 0) nUp++;
      for (let h = 0; h < 3; h++) expect(r.trajectories![j * 3 + h]).toBeCloseTo(want[h], 9);
    }
    // Half the trajectories each (binomial sd ≈ 32).
    expect(Math.abs(nUp - 2000)).toBeLessThan(150);
    // Coherent: a trajectory above 51 is above it at every lead, so any-time = per-lead = share of +2.
    expect(r.exceedanceAnyTime[0]).toBe(nUp / 4000);
    expect(r.exceedance[0]).toBe(nUp / 4000);
    // Switched off, the lead scale applies again and the archive's zero errors give the member itself.
    const off = runStochasticStage(a, { members: [50, 50, 50], nMembers: 1, nLeads: 3 }, { seed: 4, nDraws: 100, probs: [0.5], forcingPaths: false });
    expect(Array.from(off.quantiles)).toEqual([50, 50, 50]);
  });

  it('a run longer than the paths reach uses the lead scale instead', () => {
    const a = smallArchive();
    a.forcingPaths = { nLeads: 2, values: Float64Array.from([2, 2]) };
    const r = runStochasticStage(a, { members: [50, 50, 50], nMembers: 1, nLeads: 3 }, { seed: 4, nDraws: 100, probs: [0.5] });
    expect(r.pathIndex).toBeNull();
    expect(Array.from(r.quantiles)).toEqual([50, 50, 50]);
  });

  it('errors = AR(1) simulation error + a forcing path with drift: bands cover at their nominal rate and the any-time probability matches a brute-force Monte Carlo', () => {
    // Invented process, additive space. Simulation error e_t: AR(1), φ = 0.8, unit variance.
    // Forecast forcing deviation over the horizon: a random walk, step sd 0.6, drift −0.2 per lead.
    // The archive holds e alone (a continuous simulation); past runs give 900 deviation paths.
    const H = 6;
    const phi = 0.8;
    const g = createPrng(21);
    const S = 30_000;
    const corrected = Float64Array.from({ length: S }, () => 40 + 20 * g.nextFloat());
    const e = new Float64Array(S);
    e[0] = g.normal();
    for (let i = 1; i < S; i++) e[i] = phi * e[i - 1] + Math.sqrt(1 - phi * phi) * g.normal();
    const observed = Float64Array.from(corrected, (c, i) => c + e[i]);
    const a = buildArchiveFromSeries({ corrected, observed, dayOfYear: new Array(S).fill(1), templateLength: H });
    const walk = (rng: ReturnType<typeof createPrng>) => {
      const d = new Float64Array(H);
      let x = 0;
      for (let h = 0; h < H; h++) d[h] = x += -0.2 + 0.6 * rng.normal();
      return d;
    };
    const P = 900;
    const values = new Float64Array(P * H);
    for (let p = 0; p < P; p++) values.set(walk(g), p * H);
    a.forcingPaths = { nLeads: H, values };

    // Coverage of the 5–95 % band over 300 new issues, each with a fresh e and d from the process.
    const members = new Array(H).fill(50);
    const inside = new Float64Array(H);
    const truthRng = createPrng(77);
    const issues = 300;
    for (let s = 0; s < issues; s++) {
      const r = runStochasticStage(a, { members, nMembers: 1, nLeads: H }, { seed: 1000 + s, nDraws: 500, probs: [0.05, 0.95], kernel: 'uniform' });
      const d = walk(truthRng);
      let x = truthRng.normal();
      for (let h = 0; h < H; h++) {
        if (h > 0) x = phi * x + Math.sqrt(1 - phi * phi) * truthRng.normal();
        const y = 50 + x + d[h];
        if (y >= r.quantiles[2 * h] && y <= r.quantiles[2 * h + 1]) inside[h]++;
      }
    }
    // Nominal 0.90; binomial sd over 300 issues ≈ 0.017: 0.85–0.95 is about 3 sd (common practice).
    for (let h = 0; h < H; h++) expect(inside[h] / issues).toBeGreaterThan(0.85);
    for (let h = 0; h < H; h++) expect(inside[h] / issues).toBeLessThan(0.95);

    // Any time above 52 in the horizon: the stage against a brute-force Monte Carlo of the same process
    // over the same 900 stored paths.
    const r = runStochasticStage(a, { members, nMembers: 1, nLeads: H }, { seed: 5, nDraws: 20_000, thresholds: [52], kernel: 'uniform', k: 5000 });
    const mc = createPrng(99);
    const M = 200_000;
    let hits = 0;
    for (let i = 0; i < M; i++) {
      const p = mc.nextInt(P);
      let x = mc.normal();
      let hit = false;
      for (let h = 0; h < H; h++) {
        if (h > 0) x = phi * x + Math.sqrt(1 - phi * phi) * mc.normal();
        if (50 + x + values[p * H + h] > 52) hit = true;
      }
      if (hit) hits++;
    }
    const truth = hits / M;
    // Monte-Carlo sd of the stage's value ≈ √(p(1−p)/20,000) ≈ 0.0022; the errors are drawn from 5,000
    // archived cases, a sample of the normal: 0.008 allows both (about 3 sd, common practice).
    expect(Math.abs(r.exceedanceAnyTime[0] - truth)).toBeLessThan(0.008);
    // Adding a different path at each lead (paths not followed) would raise the any-time probability.
    expect(truth).toBeGreaterThan(0.05);
  });
});
