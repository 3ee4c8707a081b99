import { describe, expect, it } from 'vitest';
import { compareForecasts, createPrng, type VerificationCase } from '../../../src/core/index.ts';
import { synthetic } from './synthetic.ts';

/** Cases of a synthetic run: corrected = raw − bias; optional calibrated sampler as "stochastic". */
function casesOf(
  run: ReturnType<typeof synthetic>,
  nIssues: number,
  nLeads: number,
  nMembers: number,
  opts: { bias?: number; samples?: number; seed?: number } = {},
): VerificationCase[] {
  const g = createPrng(opts.seed ?? 17);
  const out: VerificationCase[] = [];
  for (let i = 0; i < nIssues; i++) {
    for (let h = 0; h < nLeads; h++) {
      const k = i * nLeads + h;
      const raw = Float64Array.from({ length: nMembers }, (_, m) => run.raw[(i * nMembers + m) * nLeads + h]);
      const corrected = raw.map((v) => v - (opts.bias ?? 0));
      // A perfectly calibrated sampler: draws from the very distribution the observation came from.
      const stochastic = opts.samples ? Float64Array.from({ length: opts.samples }, () => g.normal(run.centre[k], run.sd[k])) : null;
      out.push({ lead: h, observation: run.observed[k], raw, corrected, stochastic });
    }
  }
  return out;
}

describe('compareForecasts', () => {
  it('hand-checked scores on two cases (CRPS values from properscoring 0.1, properscoring/tests/test_crps.py)', () => {
    const cases: VerificationCase[] = [
      { lead: 0, observation: 0, raw: [0, 1], corrected: [-1, 1], stochastic: [0, 0, 1] },
      { lead: 1, observation: 2, raw: [1, 0], corrected: [0, 1], stochastic: [1, 0, 0] },
      { lead: 5, observation: 1, raw: [0, 1], corrected: [0, 1], stochastic: [0, 1, 1] }, // outside lead range
      { lead: 0, observation: null, raw: [0, 1], corrected: [0, 1], stochastic: [0, 1, 1] }, // not observed
      { lead: 0, observation: 1, raw: [null, NaN], corrected: [0, 1], stochastic: [0, 1, 1] }, // no raw values
    ];
    const r = compareForecasts(cases, { leadRange: { max: 2 }, thresholds: [0.5], levels: [0.5] });
    expect(r.cases).toEqual({ given: 5, used: 2, noObservation: 1, outsideLeadRange: 1, missingValues: 1 });
    expect(r.leadRange).toEqual({ min: null, max: 2 });
    expect(r.stochasticFrom).toBe('samples');
    // CRPS(0, [0, 1]) = 0.25, CRPS(2, [0, 1]) = 1.25, CRPS(0, [−1, 1]) = 0.5, CRPS(0, [0, 0, 1]) = 1/9 (properscoring 0.1, properscoring/tests/test_crps.py, test_crps_toy_examples).
    expect(r.raw.crps.crps).toBeCloseTo((0.25 + 1.25) / 2, 14);
    expect(r.corrected.crps.crps).toBeCloseTo((0.5 + 1.25) / 2, 14);
    // CRPS(2, [0, 0, 1]) by hand from the sorted form: 5/3 − 2/9 = 13/9.
    expect(r.stochastic!.crps.crps).toBeCloseTo((1 / 9 + 13 / 9) / 2, 14);
    // Fair CRPS(0, [0, 1]) = 0 and fair CRPS(2, [0, 1]) = 1 (worked by hand from the fair CRPS of Ferro 2014).
    expect(r.raw.crps.fairCrps).toBeCloseTo(0.5, 14);
    expect(r.corrected.crps.skillVsRaw).toBeCloseTo(1 - 0.875 / 0.75, 14);
    // Medians 0.5, 0.5 vs 0, 2 → MAE 1; corrected medians 0, 0.5 → MAE 0.75.
    expect(r.raw.median.mae).toBeCloseTo(1, 14);
    expect(r.corrected.median.mae).toBeCloseTo(0.75, 14);
    // Brier, event value > 0.5: raw p = 0.5, 0.5 with outcomes 0, 1 → 0.25; stochastic p = 1/3 → (1/9 + 4/9)/2.
    expect(r.raw.brier[0].brier).toBeCloseTo(0.25, 14);
    expect(r.stochastic!.brier[0].brier).toBeCloseTo(5 / 18, 14);
    expect(r.raw.brier[0].baseRate).toBe(0.5);
    // 50 % band of [0, 1] is [0.25, 0.75]: width 0.5, neither observation inside.
    expect(r.raw.intervals[0]).toMatchObject({ level: 0.5, coverage: 0, meanWidth: 0.5 });
    expect(r.raw.byLead.map((l) => [l.lead, l.n])).toEqual([[0, 1], [1, 1]]);
    expect(r.raw.members).toEqual({ min: 2, max: 2 });
  });

  it('output is plain JSON: a JSON round trip changes nothing (no typed arrays, NaN or undefined)', () => {
    const run = synthetic({ nIssues: 60, nLeads: 2, nMembers: 5, seed: 4, spread: 1 });
    const r = compareForecasts(casesOf(run, 60, 2, 5, { samples: 30 }), { thresholds: [100, 1e6], sizeStudy: { repeats: 2 } });
    expect(JSON.parse(JSON.stringify(r))).toEqual(r);
    // An event that never happens has undefined skill → null, not NaN.
    expect(r.raw.brier[1].skill).toBeNull();
  });

  it('a perfectly calibrated sampler: alpha near 1, PIT coverage near nominal, calibrated spread, small Hersbach reliability', () => {
    const I = 600;
    const H = 3;
    const M = 20;
    const run = synthetic({ nIssues: I, nLeads: H, nMembers: M, seed: 21, spread: 1 });
    const r = compareForecasts(casesOf(run, I, H, M, { samples: 300 }), { thresholds: [120], levels: [0.5, 0.9, 0.95] });
    const n = I * H;
    expect(r.cases.used).toBe(n);
    for (const s of [r.corrected, r.stochastic!]) {
      // Renard et al. 2010: α = 1 for a perfectly reliable forecast; 0.96 leaves room for sampling (common practice).
      expect(s.alphaIndex!).toBeGreaterThan(0.96);
      for (const iv of s.intervals) {
        const se = Math.sqrt((iv.level * (1 - iv.level)) / n);
        expect(Math.abs(iv.pitCoverage! - iv.level)).toBeLessThan(3 * se); // binomial standard error
      }
      expect(s.spread.class).toBe('calibrated');
      expect(Math.abs(s.pit.mean! - 0.5)).toBeLessThan(0.03);
      // Hersbach (2000): reliability + potential = CRPS; reliability small for a calibrated forecast.
      expect(s.crps.hersbach.reliability! + s.crps.hersbach.potential!).toBeCloseTo(s.crps.crps!, 9);
      for (const c of s.pitHistogram.counts) expect(Math.abs(c - n / 10)).toBeLessThan(5 * Math.sqrt(n * 0.1 * 0.9));
      expect(s.qq.uniform.length).toBe(100);
      for (let t = 0; t < 100; t++) expect(Math.abs(s.qq.pit[t] - s.qq.uniform[t])).toBeLessThan(0.05);
    }
    // Reliability diagram of the 300-sample forecast lies on the diagonal. (Not checked for the
    // 20 members: a probability k/20 is a noisy estimate, so the observed frequency given k is
    // pulled towards the base rate even for exchangeable members.)
    for (const b of r.stochastic!.brier[0].diagram) {
      if (b.count < 50) continue;
      const p = b.meanForecast!;
      expect(Math.abs(b.observedFrequency! - p)).toBeLessThan(4 * Math.sqrt((p * (1 - p) + 0.01) / b.count));
    }
    // Reliability part ≈ 0 for a calibrated ensemble (Hersbach 2000); 1 % of the CRPS: common practice.
    expect(r.stochastic!.crps.hersbach.reliability! / r.stochastic!.crps.crps!).toBeLessThan(0.01);
    // The band between Hyndman & Fan (1996) definition-7 quantiles of 20 members is too narrow even for a calibrated
    // ensemble: its 5 % end lies between the 1st and 2nd smallest member, below which the
    // observation falls with probability 1/21 and 2/21 (ranks of exchangeable values), so the
    // band covers between 1 − 4/21 ≈ 0.81 and 1 − 2/21 ≈ 0.90. PIT coverage has no such bias.
    const band = r.corrected.intervals[1];
    const se = Math.sqrt(0.09 / n);
    expect(band.coverage!).toBeGreaterThan(1 - 4 / 21 - 3 * se);
    expect(band.coverage!).toBeLessThan(band.pitCoverage! - 0.03);
    expect(r.corrected.byLead.map((l) => l.n)).toEqual([I, I, I]);
  });

  it('flags an under-dispersive ensemble and an over-dispersive one, and filters by lead range', () => {
    const I = 400;
    const H = 3;
    const M = 20;
    const narrow = compareForecasts(casesOf(synthetic({ nIssues: I, nLeads: H, nMembers: M, seed: 5, spread: 0.4 }), I, H, M), {
      leadRange: { min: 1, max: 2 },
    });
    expect(narrow.cases.used).toBe(2 * I);
    expect(narrow.cases.outsideLeadRange).toBe(I);
    expect(narrow.corrected.byLead.map((l) => l.lead)).toEqual([1, 2]);
    expect(narrow.stochastic).toBeNull();
    expect(narrow.corrected.spread.class).toBe('under-dispersive');
    // A uniform PIT has 12·var = 1 and alpha 1 (Renard et al. 2010); the bounds for 0.4× and 2.5×
    // spread sit well away from those (margins: common practice).
    expect(narrow.corrected.pit.varianceRatio!).toBeGreaterThan(1.3); // U-shaped PIT
    expect(narrow.corrected.alphaIndex!).toBeLessThan(0.85);
    const wide = compareForecasts(casesOf(synthetic({ nIssues: I, nLeads: H, nMembers: M, seed: 6, spread: 2.5 }), I, H, M));
    expect(wide.corrected.spread.class).toBe('over-dispersive');
    expect(wide.corrected.pit.varianceRatio!).toBeLessThan(0.7); // humped PIT
    expect(wide.corrected.alphaIndex!).toBeLessThan(0.85);
  });

  it('bias removal shows as better point scores and CRPS of the corrected ensemble', () => {
    const I = 300;
    const run = synthetic({ nIssues: I, nLeads: 2, nMembers: 10, seed: 8, spread: 1, bias: 8 });
    const r = compareForecasts(casesOf(run, I, 2, 10, { bias: 8 }));
    expect(r.raw.median.bias!).toBeGreaterThan(6);
    expect(Math.abs(r.corrected.median.bias!)).toBeLessThan(1.5); // bias 8 removed; 1.5: sampling room (common practice)
    expect(r.corrected.mean.rmse!).toBeLessThan(r.raw.mean.rmse!);
    expect(r.corrected.median.nse!).toBeGreaterThan(r.raw.median.nse!);
    expect(r.corrected.median.kge!).toBeGreaterThan(r.raw.median.kge!);
    expect(r.crpsDifferences.correctedVsRaw.t!).toBeLessThan(-2);
    expect(r.corrected.crps.skillVsRaw!).toBeGreaterThan(0);
  });
  it('the fair CRPS applies to exchangeable members and samples; a quantile set keeps its standard CRPS', () => {
    // Quantiles at the midpoint levels (i − 0.5)/4 of U(0, 1): 0.125, 0.375, 0.625, 0.875. They are
    // not draws, so no finite-sample correction: "fair" equals standard. As samples, the same values
    // get Ferro's (2014) correction S/(m(m − 1)) in place of S/m², which lowers the CRPS.
    const values = [0.125, 0.375, 0.625, 0.875];
    const probs = [0.125, 0.375, 0.625, 0.875];
    const base = { lead: 0, observation: 0.3, raw: [0, 1], corrected: [0.2, 0.8] };
    const asQuantiles = compareForecasts([{ ...base, stochasticQuantiles: { probs, values } }]);
    const asSamples = compareForecasts([{ ...base, stochastic: values }]);
    expect(asQuantiles.stochasticFrom).toBe('quantiles');
    expect(asQuantiles.stochastic!.crps.fairCrps).toBeCloseTo(asQuantiles.stochastic!.crps.crps!, 15);
    // Standard CRPS of the 4 values at y = 0.3, by hand from the sorted form: mean |x − y| = 1.15/4 =
    // 0.2875, S = Σ_{i<j}|x_i − x_j| = 2.5, so 0.2875 − 2.5/16 = 0.13125; fair: 0.2875 − 2.5/12.
    expect(asSamples.stochastic!.crps.crps).toBeCloseTo(0.13125, 12);
    expect(asSamples.stochastic!.crps.fairCrps).toBeCloseTo(0.2875 - 2.5 / 12, 12);
    expect(asQuantiles.stochastic!.crps.crps).toBeCloseTo(0.13125, 12);
  });
});
