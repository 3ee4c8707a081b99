import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { nearestSorted } from '../../src/core/stochastic/knn.ts';
import { buildArchiveFromReforecasts, buildArchiveFromSeries, type ErrorArchive } from '../../src/core/stochastic/error-archive.ts';
import { createStochasticWorkspace, runStochasticStage } from '../../src/core/stochastic/stochastic-stage.ts';
import { createPrng } from '../../src/core/prng.ts';
import { quantiles } from '../../src/core/scores/quantile.ts';
import { forwardTransform, inverseTransform } from '../../src/core/stochastic/error-transform.ts';
import { normalQuantile } from '../../src/core/scores/normal.ts';

/** 9 cases with predictors 1 … 9 and errors 100·predictor, so a drawn value names its case. */
function tinyArchive(dayOfYear?: number[]): ErrorArchive {
  const corrected = [1, 2, 3, 4, 5, 6, 7, 8, 9];
  return buildArchiveFromSeries({
    corrected,
    observed: corrected.map((c) => c + 100 * c),
    dayOfYear: dayOfYear ?? corrected.map(() => 1),
    templateLength: 2,
  });
}

describe('stochastic error stage', () => {
  it('draws the j-th nearest case with Lall & Sharma weights 6/11, 3/11, 2/11 (k = round(√9) = 3)', () => {
    const n = 33000;
    const r = runStochasticStage(tinyArchive(), { members: [5], nMembers: 1, nLeads: 1 }, { seed: 1, nDraws: n, shuffle: false, keepTrajectories: true });
    expect(Array.from(r.kPerLead)).toEqual([3]);
    const count = new Map<number, number>();
    for (const v of r.trajectories!) count.set(v, (count.get(v) ?? 0) + 1);
    // Nearest to 5: case 5 (error 500), then 4 and 6 at equal distance, ranked 2nd and 3rd in an
    // order drawn at random once per call (weights: Lall & Sharma 1996, eq. 7).
    expect([...count.keys()].sort((a, b) => a - b)).toEqual([405, 505, 605]);
    const se = (p: number) => Math.sqrt((p * (1 - p)) / n); // binomial standard error; 5 SE bounds
    expect(Math.abs(count.get(505)! / n - 6 / 11)).toBeLessThan(5 * se(6 / 11));
    const second = count.get(405)! > count.get(605)! ? 405 : 605;
    expect(Math.abs(count.get(second)! / n - 3 / 11)).toBeLessThan(5 * se(3 / 11));
    expect(Math.abs(count.get(1010 - second)! / n - 2 / 11)).toBeLessThan(5 * se(2 / 11));
    // Over seeds, either tied case comes second (never the first by position in the archive).
    const seconds = new Set<number>();
    for (let seed = 1; seed <= 20; seed++) {
      const t = runStochasticStage(tinyArchive(), { members: [5], nMembers: 1, nLeads: 1 }, { seed, nDraws: 2000, shuffle: false, keepTrajectories: true }).trajectories!;
      seconds.add(t.filter((v) => v === 405).length > t.filter((v) => v === 605).length ? 405 : 605);
    }
    expect(seconds).toEqual(new Set([405, 605]));
  });

  it('property: the stage draws only from the k nearest cases, all strictly nearer ones included, ties at random', () => {
    fc.assert(
      fc.property(
        fc.array(fc.integer({ min: 0, max: 20 }), { minLength: 1, maxLength: 30 }),
        fc.integer({ min: -2, max: 22 }),
        fc.integer({ min: 1, max: 5 }),
        (preds, x, kWanted) => {
          // Error of case i is 1000·(i + 1), so a draw names its case.
          const a = buildArchiveFromSeries({
            corrected: preds,
            observed: preds.map((p, i) => p + 1000 * (i + 1)),
            dayOfYear: preds.map(() => 1),
            templateLength: 1,
          });
          const k = Math.min(kWanted, preds.length);
          const r = runStochasticStage(a, { members: [x], nMembers: 1, nLeads: 1 }, { seed: 1, nDraws: 2000, k, shuffle: false, keepTrajectories: true });
          // The k-th distance from the reference search; every case nearer than it must be drawn,
          // cases at it may be, farther ones never.
          const out = new Float64Array(k);
          nearestSorted(a.predictor, a.predictor, 0, a.predictor.length, x, k, out);
          const dk = Math.max(...Array.from(out, (p) => Math.abs(p - x)));
          const value = (i: number) => Math.max(0, x) + 1000 * (i + 1);
          const got = new Set(r.trajectories);
          const mustHave = preds.flatMap((p, i) => (Math.abs(p - x) < dk ? [value(i)] : []));
          const mayHave = new Set(preds.flatMap((p, i) => (Math.abs(p - x) <= dk ? [value(i)] : [])));
          return mustHave.every((v) => got.has(v)) && [...got].every((v) => mayHave.has(v));
        },
      ),
      { numRuns: 60 },
    );
  });

  it('keeps to the seasonal window (circular) and falls back to all cases when it is empty', () => {
    // Cases 1–3 on day 360, 4–6 on day 5, 7–9 on day 180; member at 8 on day 2 with ±10 days.
    const a = tinyArchive([360, 360, 360, 5, 5, 5, 180, 180, 180]);
    const r = runStochasticStage(a, { members: [8], nMembers: 1, nLeads: 1, dayOfYear: 2 }, { seed: 2, nDraws: 500, seasonalWindowDays: 10, shuffle: false, keepTrajectories: true, k: 3 });
    const used = new Set(Array.from(r.trajectories!, (v) => (v - 8) / 100));
    for (const c of used) expect([1, 2, 3, 4, 5, 6]).toContain(c);
    expect(used.has(6)).toBe(true); // the nearest in the window
    const none = runStochasticStage(a, { members: [8], nMembers: 1, nLeads: 1, dayOfYear: 90 }, { seed: 2, nDraws: 200, seasonalWindowDays: 5, shuffle: false, keepTrajectories: true, k: 1 });
    expect(new Set(none.trajectories)).toEqual(new Set([808]));
  });

  it('is deterministic for a seed, and the shuffle keeps the marginals and follows the template ranks', () => {
    const g = createPrng(4);
    const S = 3000;
    const corrected = Float64Array.from({ length: S }, (_, i) => 30 + 20 * Math.sin(i / 40) + 5 * g.nextFloat());
    let ar = 0;
    const observed = Float64Array.from(corrected, (c) => {
      ar = 0.9 * ar + g.normal();
      return Math.max(0, c + 3 * ar);
    });
    const dayOfYear = Array.from({ length: S }, (_, i) => (i % 365) + 1);
    const a = buildArchiveFromSeries({ corrected, observed, dayOfYear, templateLength: 12 });
    const H = 12;
    const M = 7;
    const members = Float64Array.from({ length: M * H }, () => 20 + 30 * g.nextFloat());
    const input = { members, nMembers: M, nLeads: H, dayOfYear: 50 };
    const opts = { seed: 77, nDraws: 300, thresholds: [35, 45, 60], keepTrajectories: true };
    const ws = createStochasticWorkspace();
    const r1 = runStochasticStage(a, input, opts, ws);
    const r2 = runStochasticStage(a, input, opts, ws);
    expect(Array.from(r2.trajectories!)).toEqual(Array.from(r1.trajectories!));
    expect(Array.from(runStochasticStage(a, input, { ...opts, seed: 78 }).quantiles)).not.toEqual(Array.from(r1.quantiles));
    const flat = runStochasticStage(a, input, { ...opts, shuffle: false });
    const N = 300;
    const tr = r1.trajectories!;
    const member = r1.memberIndex;
    for (let h = 0; h < H; h++) {
      const shuffled = Array.from({ length: N }, (_, j) => tr[j * H + h]).sort((x, y) => x - y);
      const plain = Array.from({ length: N }, (_, j) => flat.trajectories![j * H + h]).sort((x, y) => x - y);
      expect(shuffled).toEqual(plain); // marginal kept exactly
      // Template ranks reproduced among the draws of one member: template order implies trajectory order.
      const tv = Array.from({ length: N }, (_, j) => a.templateValues[a.templateStart[r1.templateIndex![j]] + h]);
      for (let i = 0; i < N; i++) {
        for (let j = 0; j < N; j++) {
          if (member[i] === member[j] && tv[i] < tv[j]) expect(tr[i * H + h]).toBeLessThanOrEqual(tr[j * H + h]);
        }
      }
      // Quantiles are the Hyndman & Fan (1996) definition-7 quantiles of the lead's values.
      const q = quantiles(shuffled, r1.probs);
      for (let p = 0; p < q.length; p++) expect(r1.quantiles[h * r1.probs.length + p]).toBeCloseTo(q[p], 12);
      for (let p = 1; p < q.length; p++) expect(r1.quantiles[h * r1.probs.length + p]).toBeGreaterThanOrEqual(r1.quantiles[h * r1.probs.length + p - 1]);
    }
    // 3000 − 12 + 1 windows ≥ 300 draws: templates are distinct.
    expect(new Set(r1.templateIndex).size).toBe(N);
    // Any-time probability: at least the largest per-lead probability; first likely lead consistent.
    for (let t = 0; t < 3; t++) {
      let maxLead = 0;
      for (let h = 0; h < H; h++) maxLead = Math.max(maxLead, r1.exceedance[t * H + h]);
      expect(r1.exceedanceAnyTime[t]).toBeGreaterThanOrEqual(maxLead);
      const first = r1.firstLikelyLead[t];
      if (first === null) expect(maxLead).toBeLessThanOrEqual(0.5);
      else {
        expect(r1.exceedance[t * H + first]).toBeGreaterThan(0.5);
        for (let h = 0; h < first; h++) expect(r1.exceedance[t * H + h]).toBeLessThanOrEqual(0.5);
      }
    }
  });

  it('reuses templates cyclically when there are fewer than N', () => {
    const nIssues = 4;
    const H = 3;
    const corrected = Array.from({ length: nIssues * H }, (_, i) => 10 + i);
    const observed = corrected.map((c, i) => c + ((i * 7) % 5) - 2);
    const a = buildArchiveFromReforecasts({ nIssues, nLeads: H, corrected, observed, dayOfYear: corrected.map(() => 10) });
    const r = runStochasticStage(a, { members: [10, 12, 14], nMembers: 1, nLeads: H }, { seed: 3, nDraws: 10 });
    const idx = Array.from(r.templateIndex!);
    for (let j = 4; j < 10; j++) expect(idx[j]).toBe(idx[j - 4]);
    expect(new Set(idx.slice(0, 4)).size).toBe(4);
  });

  it('picks among bundled residual models and members (nModels × nMembers × nLeads)', () => {
    // Zero errors everywhere: the draws are exactly the member values.
    const corrected = Array.from({ length: 50 }, (_, i) => i * 30);
    const a = buildArchiveFromSeries({ corrected, observed: corrected, dayOfYear: corrected.map(() => 1), templateLength: 2 });
    const members = [10, 10, 20, 20, 1000, 1000, 2000, 2000]; // 2 models × 2 members × 2 leads
    const n = 4000;
    const r = runStochasticStage(a, { members, nModels: 2, nMembers: 2, nLeads: 2 }, { seed: 5, nDraws: n, thresholds: [500], shuffle: false, keepTrajectories: true });
    // Half of the draws come from model 1 (binomial SE 0.008; 5 SE).
    expect(Math.abs(r.exceedance[0] - 0.5)).toBeLessThan(0.04);
    expect(new Set(r.trajectories)).toEqual(new Set([10, 20, 1000, 2000]));
    // A member is kept over the horizon without the shuffle.
    for (let j = 0; j < n; j++) expect(r.trajectories![2 * j]).toBe(r.trajectories![2 * j + 1]);
  });

  it('in log space the band scales with flow and flows stay ≥ 0', () => {
    const g = createPrng(6);
    const S = 4000;
    const corrected = Float64Array.from({ length: S }, () => 1 + 200 * g.nextFloat());
    const observed = Float64Array.from(corrected, (c) => c * Math.exp(0.2 * g.normal()));
    const a = buildArchiveFromSeries({ corrected, observed, dayOfYear: Array.from({ length: S }, () => 1), templateLength: 2, transform: { kind: 'log', offset: 0.01 } });
    const r = runStochasticStage(a, { members: [10, 100], nMembers: 1, nLeads: 2 }, { seed: 1, nDraws: 4000, probs: [0.05, 0.5, 0.95] });
    const w10 = r.quantiles[2] / r.quantiles[0];
    const w100 = r.quantiles[5] / r.quantiles[3];
    // Multiplicative noise σ = 0.2 in log space: 5–95 % ratio ≈ exp(2·1.645·0.2) = 1.93 at both flows
    // (1.645 = scipy.stats.norm.ppf(0.95) = 1.6448536, exp(…) = 1.9308; Debian python3-scipy 1.10.1,
    // test/fixtures/normal-table/print_values.py). Bounds 1.6–2.3: common practice for 4000 draws.
    expect(w10).toBeGreaterThan(1.6);
    expect(w10).toBeLessThan(2.3);
    expect(w100).toBeGreaterThan(1.6);
    expect(w100).toBeLessThan(2.3);
    expect(r.quantiles[4] / r.quantiles[1]).toBeGreaterThan(8);
    const neg = runStochasticStage(a, { members: [0], nMembers: 1, nLeads: 1 }, { seed: 1, nDraws: 500, shuffle: false, probs: [0] });
    expect(neg.quantiles[0]).toBeGreaterThanOrEqual(0);
  });

  it('a draw is T⁻¹(T(member) + error), clipped at 0, in every transform space', () => {
    for (const transform of [{ kind: 'none' }, { kind: 'log', offset: 0.5 }, { kind: 'boxcox', lambda: 0.3, offset: 0.5 }, { kind: 'boxcox', lambda: 0.5, offset: 0.5 }, { kind: 'boxcox', lambda: 1 / 3, offset: 0.5 }, { kind: 'boxcox', lambda: 0, offset: 0.5 }] as const) {
      // One archived case: corrected 20, observed 26 → one error in the transform's space.
      const a = buildArchiveFromSeries({ corrected: [20], observed: [26], dayOfYear: [1], templateLength: 1, transform: transform });
      const e = a.error[0];
      const members = [3, 20, 100, 0];
      const r = runStochasticStage(a, { members, nMembers: 4, nLeads: 1 }, { seed: 1, nDraws: 400, shuffle: false, keepTrajectories: true });
      const got = new Set(Array.from(r.trajectories!, (v) => v.toPrecision(12)));
      const want = new Set(members.map((x) => Math.max(0, inverseTransform(a.transform, forwardTransform(a.transform, x) + e)).toPrecision(12)));
      expect(got, transform.kind).toEqual(want);
    }
    // Additive error larger than the flow: clipped at 0.
    const a = buildArchiveFromSeries({ corrected: [20], observed: [5], dayOfYear: [1], templateLength: 1 });
    const r = runStochasticStage(a, { members: [10], nMembers: 1, nLeads: 1 }, { seed: 1, nDraws: 10, shuffle: false, probs: [0, 1] });
    expect(Array.from(r.quantiles)).toEqual([0, 0]);
  });

  it('Box–Cox results (worked out in the transform space) agree with the returned flow trajectories', () => {
    const g = createPrng(12);
    const S = 2000;
    const corrected = Float64Array.from({ length: S }, () => 40 * g.nextFloat());
    const observed = Float64Array.from(corrected, (c) => Math.max(0, c + (1 + 0.2 * c) * g.normal()));
    const H = 6;
    for (const offset of [0, 0.3]) {
      const a = buildArchiveFromSeries({ corrected, observed, dayOfYear: Array.from({ length: S }, () => 1), templateLength: H, transform: { kind: 'boxcox', lambda: 0.3, offset } });
      const members = Float64Array.from({ length: 3 * H }, () => 40 * g.nextFloat());
      const thresholds = [0, 5, 20, 35];
      const N = 500;
      const r = runStochasticStage(a, { members, nMembers: 3, nLeads: H }, { seed: 3, nDraws: N, thresholds, keepTrajectories: true });
      const tr = r.trajectories!;
      for (let h = 0; h < H; h++) {
        const lead = Array.from({ length: N }, (_, j) => tr[j * H + h]);
        const q = quantiles(lead, r.probs);
        q.forEach((v, i) => expect(r.quantiles[h * r.probs.length + i]).toBeCloseTo(v, 9));
        thresholds.forEach((t, ti) => expect(r.exceedance[ti * H + h]).toBe(lead.filter((v) => v > t).length / N));
      }
      thresholds.forEach((t, ti) => {
        let c = 0;
        for (let j = 0; j < N; j++) if (tr.subarray(j * H, (j + 1) * H).some((v) => v > t)) c++;
        expect(r.exceedanceAnyTime[ti]).toBe(c / N);
      });
      expect(Math.min(...tr)).toBeGreaterThanOrEqual(0);
    }
  });

  it('statistical check: member = truth + bias + N(0, σ²) gives a 5–95 % band → truth ± 1.645σ', () => {
    // Same process for archive and new cases. The predictive distribution given a member value c is
    // N(c − bias, σ²) when truth varies widely, so the band is (c − bias) ± 1.645σ (1.645 =
    // scipy.stats.norm.ppf(0.95) = 1.6448536, Debian python3-scipy 1.10.1, test/fixtures/normal-table/print_values.py),
    // and the band covers the truth 90 % of the time.
    const g = createPrng(2025);
    const bias = 4;
    const sigma = 2;
    const S = 10000;
    const truth = Float64Array.from({ length: S }, () => 50 + 400 * g.nextFloat());
    const corrected = Float64Array.from(truth, (y) => y + bias + sigma * g.normal());
    const a = buildArchiveFromSeries({ corrected, observed: truth, dayOfYear: Array.from({ length: S }, () => 1), templateLength: 1 });
    const nNew = 400;
    const newTruth = Float64Array.from({ length: nNew }, () => 80 + 340 * g.nextFloat());
    const members = Float64Array.from(newTruth, (y) => y + bias + sigma * g.normal());
    // Each "lead" holds one independent new case (lead-free archive, no shuffle needed).
    const r = runStochasticStage(a, { members, nMembers: 1, nLeads: nNew }, { seed: 8, nDraws: 2000, probs: [0.05, 0.95], shuffle: false });
    let width = 0;
    let centre = 0;
    let covered = 0;
    for (let i = 0; i < nNew; i++) {
      const lo = r.quantiles[2 * i];
      const hi = r.quantiles[2 * i + 1];
      width += (hi - lo) / nNew;
      centre += ((lo + hi) / 2 - (members[i] - bias)) / nNew;
      if (newTruth[i] >= lo && newTruth[i] <= hi) covered++;
    }
    const k = r.kPerLead[0];
    expect(k).toBe(100); // round(√10000)
    // Location: unbiased.
    expect(Math.abs(centre)).toBeLessThan(0.05 * sigma);
    // Width: kernel resampling of k iid errors has expected variance (1 − Σw_j²)σ² (derived by hand:
    // E Σ w_j (e_j − ē_w)² with ē_w = Σ w_j e_j). For k = 100 with Lall & Sharma weights Σw_j² = 0.0608,
    // so the band is expected near 2·1.645σ·0.969, i.e. 3 % narrower than truth ± 1.645σ.
    let sumW2 = 0;
    let hk = 0;
    for (let j = 1; j <= k; j++) hk += 1 / j;
    for (let j = 1; j <= k; j++) sumW2 += 1 / (j * hk) ** 2;
    const expected = 2 * 1.645 * sigma * Math.sqrt(1 - sumW2);
    // Per-case width SD ≈ 0.3σ; neighbour sets of adjacent cases overlap, leaving ~80 independent
    // cases: SE ≈ 0.035σ. 0.1σ ≈ 3 SE, plus the small discreteness of tail quantiles.
    expect(Math.abs(width - expected)).toBeLessThan(0.1 * sigma);
    expect(width / (2 * 1.645 * sigma)).toBeGreaterThan(0.92);
    expect(width / (2 * 1.645 * sigma)).toBeLessThan(1.0);
    // Coverage: nominal 0.90. Each band rests on few effective errors (1/Σw² ≈ 16), so it varies from
    // case to case and covers less than nominal (observed here: 0.83). Bounds: binomial SE 0.015.
    expect(covered / nNew).toBeGreaterThan(0.8);
    expect(covered / nNew).toBeLessThan(0.92);
  });

  it('statistical check: with autocorrelated errors the shuffle gets "exceeded at any time" right', () => {
    // Errors follow a stationary AR(1) with φ = 0.95, σ = 1 (invented process). The member is 10 at
    // every lead, so every lead resamples the same neighbours and has the same marginal exceedance p̂
    // of the threshold. The kernel's few effective neighbours make p̂ itself noisy, so the reference is
    // built on the stage's own marginal: by Monte Carlo, P(max over 10 leads of the AR(1) > z*) with
    // z* = Φ⁻¹(1 − p̂). Without the shuffle the leads are independent: 1 − (1 − p̂)^10.
    const g = createPrng(31);
    const phi = 0.95;
    const innov = Math.sqrt(1 - phi * phi);
    const S = 20000;
    const corrected = Float64Array.from({ length: S }, () => 9 + 2 * g.nextFloat());
    let e = g.normal();
    const observed = Float64Array.from(corrected, (c) => {
      e = phi * e + innov * g.normal();
      return c + e;
    });
    const H = 10;
    const a = buildArchiveFromSeries({ corrected, observed, dayOfYear: Array.from({ length: S }, () => 1), templateLength: H });
    const input = { members: new Float64Array(H).fill(10), nMembers: 1, nLeads: H };
    const opts = { seed: 4, nDraws: 4000, thresholds: [12] };
    const r = runStochasticStage(a, input, opts);
    const independent = runStochasticStage(a, input, { ...opts, shuffle: false }).exceedanceAnyTime[0];
    let pHat = 0;
    for (let h = 0; h < H; h++) pHat += r.exceedance[h] / H;
    for (let h = 0; h < H; h++) expect(Math.abs(r.exceedance[h] - pHat)).toBeLessThan(0.02);
    const z = normalQuantile(1 - pHat);
    const paths = 200000;
    let hits = 0;
    for (let p = 0; p < paths; p++) {
      let x = g.normal();
      let m = x;
      for (let h = 1; h < H; h++) {
        x = phi * x + innov * g.normal();
        if (x > m) m = x;
      }
      if (m > z) hits++;
    }
    const reference = hits / paths;
    // Binomial SE with 4000 draws ≈ 0.005; the templates (4000 windows of one 20 000-step series,
    // ~500 independent stretches) add some more: ±0.02.
    expect(Math.abs(r.exceedanceAnyTime[0] - reference)).toBeLessThan(0.02);
    expect(Math.abs(independent - (1 - (1 - pHat) ** H))).toBeLessThan(0.03);
    expect(independent).toBeGreaterThan(2 * reference);
  });

  it('rejects bad input with clear messages', () => {
    const a = tinyArchive();
    expect(() => runStochasticStage(a, { members: [1, 2], nMembers: 1, nLeads: 1 }, { seed: 1 })).toThrow(/members must hold/);
    expect(() => runStochasticStage(a, { members: [NaN], nMembers: 1, nLeads: 1 }, { seed: 1 })).toThrow(/finite/);
    expect(() => runStochasticStage(a, { members: [1, 2, 3], nMembers: 1, nLeads: 3 }, { seed: 1 })).toThrow(/templates/);
    expect(() => runStochasticStage(a, { members: [1], nMembers: 1, nLeads: 1 }, { seed: 1, seasonalWindowDays: 5 })).toThrow(/dayOfYear/);
    const rf = buildArchiveFromReforecasts({ nIssues: 1, nLeads: 1, corrected: [1], observed: [1], dayOfYear: [1] });
    expect(() => runStochasticStage(rf, { members: [1, 2], nMembers: 1, nLeads: 2 }, { seed: 1 })).toThrow(/lead times/);
  });
});
