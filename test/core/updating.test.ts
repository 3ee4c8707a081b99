// Issue-time updating: the closed-form predictors against the AR(1) process they model.
// Source for the checks: Box, Jenkins, Reinsel & Ljung, Time Series Analysis: Forecasting and
// Control (5th ed., 2015): ch. 3.2 (AR(1): lag-k autocorrelation φ^k), ch. 5.4 (the k-step-ahead
// minimum mean-square-error forecast of an AR(1) is φ^k·z_t), ch. 7 (least-squares estimation).
import { describe, expect, it } from 'vitest';
import { createPrng } from '../../src/core/prng.ts';
import {
  applyUpdating,
  ar1Multipliers,
  buildPseudoForecasts,
  fitAr1,
  fitPhiPerLead,
  multiplierPredictor,
  scoreShifts,
  updatingWarmupProblem,
  type UpdatingModel,
} from '../../src/core/correction/updating.ts';
import { makeFeatureSpec } from '../../src/core/features/features.ts';
import { chooseIssueObservation } from '../../src/core/correction/issue-observation.ts';
import { archiveStrata, stratumOf } from '../../src/core/stochastic/error-archive.ts';
import type { ErrorTransform } from '../../src/core/stochastic/error-transform.ts';
import { defaultLeadBands, defaultUpdatingLeads, fitUpdatingFromSeries } from '../../src/models/updating-fit.ts';

const LOG: ErrorTransform = { kind: 'log', offset: 1 };
const DAY = 86_400_000;

/** A zero-mean AR(1) series e_t = φ·e_{t−1} + a_t with a_t ~ N(0, σ²), seeded. */
function ar1Series(n: number, phi: number, sigma: number, seed: number): Float64Array {
  const g = createPrng(seed);
  const e = new Float64Array(n);
  e[0] = (sigma / Math.sqrt(1 - phi * phi)) * g.normal();
  for (let t = 1; t < n; t++) e[t] = phi * e[t - 1] + sigma * g.normal();
  return e;
}

/**
 * A gauge whose corrected members are a constant 100 m³/s and whose observation is
 * exp(ln(101) + e_t) − 1, so the log-space error (offset 1) of every member is exactly e_t plus a
 * small member-specific white noise.
 */
function synthetic(n: number, phi: number, members: number, seed: number) {
  const e = ar1Series(n, phi, 0.2, seed);
  const g = createPrng(seed + 1);
  const times = Float64Array.from({ length: n }, (_, t) => Date.UTC(2000, 0, 1) + t * DAY);
  const observed = Float64Array.from(e, (x) => Math.exp(Math.log(101) + x) - 1);
  const corrected = Array.from({ length: members }, () => Float64Array.from({ length: n }, () => Math.exp(Math.log(101) + 0.02 * g.normal()) - 1));
  return { e, times, observed, corrected, series: { times, observed, stepSeconds: 86400, members: corrected.map((values, m) => ({ id: `m${m}`, values })) } };
}

describe('closed-form updating (Box & Jenkins)', () => {
  it('least squares recovers the AR(1) coefficient of a known process', () => {
    for (const phi of [0.3, 0.8, 0.95]) {
      const e = ar1Series(20_000, phi, 1, 7);
      // Standard error of the estimate ≈ √((1 − φ²)/n) (Box & Jenkins ch. 7.2): under 0.007 here.
      expect(Math.abs(fitAr1([e]) - phi)).toBeLessThan(0.03);
    }
  });

  it('the k-step predictor is φ^k·e_t', () => {
    const m = ar1Multipliers(0.8, 5);
    m.forEach((v, k) => expect(v).toBeCloseTo(0.8 ** (k + 1), 14));
    const model: UpdatingModel = { method: 'ar1', transform: { kind: 'none' }, phi: m, ar1: 0.8 };
    // Transform none: the corrected member 10 with observation 12 at issue (e_t = 2).
    const values = new Float64Array([10, 10, 10, 10, 10]);
    const e0 = applyUpdating(model, values, [10], 12, 0, 5);
    expect(e0[0]).toBe(2);
    values.forEach((v, k) => expect(v).toBeCloseTo(10 + 2 * 0.8 ** (k + 1), 12));
    // An observation one step old: lead 1 of the run is lead 2 from it.
    const stale = new Float64Array([10, 10]);
    applyUpdating(model, stale, [10], 12, 1, 2);
    expect(stale[0]).toBeCloseTo(10 + 2 * 0.8 ** 2, 12);
  });

  it('φ_k fitted per lead on pseudo-forecasts matches φ^k of the process', () => {
    const s = synthetic(6000, 0.85, 4, 3);
    const cube = buildPseudoForecasts({ transform: LOG, observed: s.observed, simulated: s.corrected, corrected: s.corrected, issueIndex: Array.from({ length: 5980 }, (_, i) => i + 5), nLeads: 6 });
    const phi = fitPhiPerLead(cube, Array.from({ length: cube.nIssues }, (_, i) => i));
    phi.forEach((p, k) => expect(Math.abs(p - 0.85 ** (k + 1))).toBeLessThan(0.05));
    // Updating lowers the lead-1 CRPS of the members against not updating.
    const issues = Array.from({ length: 2000 }, (_, i) => i);
    const none = scoreShifts(cube, LOG, issues, null).byLead;
    const upd = scoreShifts(cube, LOG, issues, multiplierPredictor(phi)(cube, issues)).byLead;
    expect(upd[0].crps!).toBeLessThan(0.7 * none[0].crps!);
  });
});

describe('choosing updating on a held-out block', () => {
  const options = { mode: 'auto' as const, leads: 5, leadBands: null, history: 2, trees: false, seed: 1, maxTrainRows: 20_000 };
  it('auto keeps updating for persistent (AR(1)) errors', () => {
    const s = synthetic(3000, 0.9, 4, 11);
    const fit = fitUpdatingFromSeries(s.series, s.corrected, { fromMs: s.times[0], toMs: s.times[2999] + 1 }, LOG, options);
    expect(fit.model).not.toBeNull();
    expect(fit.leads[0].on).toBe(true);
    expect(Math.abs(fit.model!.ar1 - 0.9)).toBeLessThan(0.05);
    // The archive's issue errors are aligned with its cases: each case's error is the observed
    // error at its lead minus the update, so |error| is small where |ε0| is (lead 1, φ ≈ 0.9).
    const { archive, issueError } = fit.archive!;
    expect(issueError.length).toBe(archive.error.length);
    // The archive splits each lead into strata of the issue error; every case's issue error lies in
    // the stratum of the group that holds it (group = lead × S + stratum).
    const S = archiveStrata(archive);
    expect(S).toBe(5);
    for (let g = 0; g < archive.nLeads * S; g++) {
      for (let i = archive.groupStart[g]; i < archive.groupStart[g + 1]; i++) expect(stratumOf(archive.issueErrorEdges, issueError[i])).toBe(g % S);
    }
  });

  it('auto switches updating off for white-noise errors', () => {
    const s = synthetic(3000, 0, 4, 12);
    const fit = fitUpdatingFromSeries(s.series, s.corrected, { fromMs: s.times[0], toMs: s.times[2999] + 1 }, LOG, options);
    // With φ = 0 no lead gains beyond twice its standard error (or, where one does by chance,
    // the gain is tiny: updating then does no harm).
    const on = fit.leads.filter((l) => l.on);
    if (fit.model === null) expect(fit.reason).toMatch(/auto found no lead time/);
    else for (const l of on) expect(Math.abs(fit.model.phi[l.lead - 1])).toBeLessThan(0.1);
    expect(on.length).toBeLessThanOrEqual(1);
  });
});

describe('defaults for a daily and an hourly gauge', () => {
  it('cover ten days of lead times within the archive templates, banded for the trees', () => {
    expect(defaultUpdatingLeads(86400, 240)).toBe(10);
    expect(defaultUpdatingLeads(3600, 240)).toBe(240);
    expect(defaultUpdatingLeads(3600, 72)).toBe(72);
    expect(defaultLeadBands(10)).toEqual([[1, 2], [3, 5], [6, 10]]);
    expect(defaultLeadBands(240).at(-1)).toEqual([161, 240]);
  });
});

describe('serving prerequisites', () => {
  it('names the warm-up a stale observation needs', () => {
    const spec = makeFeatureSpec({ stepSeconds: 86400, simLags: 9, forcings: [{ name: 'precipitation', lags: 3 }] });
    expect(updatingWarmupProblem(spec, 10, 0)).toBeNull();
    expect(updatingWarmupProblem(spec, 10, 1)).toMatch(/needs 11/);
  });
});

describe('real past runs join the pseudo-forecasts', () => {
  it('are counted by source, scored apart, and checked by auto when block C holds enough of them', () => {
    const s = synthetic(3000, 0.9, 4, 21);
    const g = createPrng(99);
    const H = 5;
    // Daily past runs over the whole period: the corrected members plus a forcing-like error
    // growing with lead (so they differ from the pseudo-forecasts).
    const issueIndex = Array.from({ length: 2980 }, (_, i) => i + 5);
    const members = [0, 1, 2, 3];
    const corrected = new Float64Array(issueIndex.length * members.length * H);
    issueIndex.forEach((t, u) => members.forEach((m, j) => {
      for (let k = 0; k < H; k++) corrected[(u * members.length + j) * H + k] = s.corrected[m][t + k + 1] * Math.exp(0.05 * (k + 1) * g.normal());
    }));
    const fit = fitUpdatingFromSeries(
      s.series,
      s.corrected,
      { fromMs: s.times[0], toMs: s.times[2999] + 1 },
      LOG,
      { mode: 'auto', leads: H, leadBands: null, history: 2, trees: false, seed: 1, maxTrainRows: 20_000 },
      () => false,
      { nLeads: H, issueIndex, members, raw: corrected, corrected },
    );
    expect(fit.sources.pastRuns.heldOut).toBeGreaterThanOrEqual(50);
    expect(fit.checkedOnPastRuns).toBe(true);
    expect(fit.leads[0].on).toBe(true);
    expect(fit.leads[0].pastRunGain).toBeGreaterThan(0);
    const phiLs = fit.candidates.find((c) => c.name === 'phi-per-lead')!;
    expect(phiLs.pastRuns!.byLead).toHaveLength(H);
    // Persistent errors: updating helps at lead 1 on the past runs too.
    const none = fit.candidates[0].pastRuns!.byLead[0].crps!;
    expect(phiLs.pastRuns!.byLead[0].crps!).toBeLessThan(none);
    expect(fit.archive!.summary.pastRunIssues).toBeGreaterThan(0);
    expect(fit.archive!.issueError.length).toBe(fit.archive!.archive.error.length);
  });
});

describe('an hourly gauge with the default horizon', () => {
  it('fits 240 lead times within bounded memory and a bounded archive', () => {
    // Hourly errors with a memory of about four days (φ = 0.99 per hour).
    const n = 8760;
    const HOUR = 3_600_000;
    const e = ar1Series(n, 0.99, 0.03, 5);
    const g = createPrng(6);
    const times = Float64Array.from({ length: n }, (_, t) => Date.UTC(2020, 0, 1) + t * HOUR);
    const observed = Float64Array.from(e, (x) => Math.exp(Math.log(101) + x) - 1);
    const corrected = Array.from({ length: 3 }, () => Float64Array.from({ length: n }, () => Math.exp(Math.log(101) + 0.01 * g.normal()) - 1));
    const leads = defaultUpdatingLeads(3600, 240);
    const fit = fitUpdatingFromSeries(
      { times, observed, stepSeconds: 3600, members: corrected.map((values, m) => ({ id: `m${m}`, values })) },
      corrected,
      { fromMs: times[0], toMs: times[n - 1] + 1 },
      LOG,
      { mode: 'auto', leads, leadBands: null, history: 2, trees: false, seed: 1, maxTrainRows: 20_000 },
    );
    expect(fit.model!.phi).toHaveLength(240);
    expect(Math.abs(fit.model!.ar1 - 0.99)).toBeLessThan(0.01);
    expect(fit.leads[0].on).toBe(true);
    expect(fit.archive!.archive.predictor.length).toBeLessThanOrEqual(1_000_000);
  });
});

describe('the observation a run is updated on', () => {
  const DAY_S = 86400;
  const issue = Date.UTC(2024, 4, 10);
  const at = (days: number, value: number | null) => ({ t: issue + days * DAY, value });
  it("takes the run's own observation first, else the latest stored one at or before issue time", () => {
    const stored = [at(-2, 5), at(-1, 6), at(0, null), at(1, 99)];
    expect(chooseIssueObservation(issue, DAY_S, 2, 7.5, stored).observation).toEqual({ timeMs: issue, value: 7.5, source: 'run', ageSteps: 0 });
    expect(chooseIssueObservation(issue, DAY_S, 2, null, stored).observation).toEqual({ timeMs: issue - DAY, value: 6, source: 'archive', ageSteps: 1 });
  });
  it('leakage: observations after the issue time never change the choice', () => {
    const before = [at(-3, 4), at(-1, 6)];
    const a = chooseIssueObservation(issue, DAY_S, 2, null, before);
    for (const later of [[at(1, 1)], [at(0.5, 2), at(2, 1e6)], [at(1, null)]]) {
      expect(chooseIssueObservation(issue, DAY_S, 2, null, [...before, ...later])).toEqual(a);
    }
  });
  it('says why when none is recent enough', () => {
    const r = chooseIssueObservation(issue, DAY_S, 2, undefined, [at(-3, 4)]);
    expect(r.observation).toBeNull();
    expect(r.reason).toMatch(/latest observation \(2024-05-07T00:00:00Z\) is older than the gauge's maximum age \(2 steps\)/);
    expect(chooseIssueObservation(issue, DAY_S, 2, undefined, []).reason).toMatch(/no observation at or before the issue time/);
  });
});

describe('forecast-forcing error in the updated archive', () => {
  it('adds the past runs\' τ² to each lead\'s error variance (g = √(1 + τ²/V), derived in src/core/stochastic/lead-growth.ts)', () => {
    const s = synthetic(3000, 0.9, 4, 31);
    const o = { mode: 'on' as const, leads: 3, leadBands: null, history: 2, trees: false, seed: 1, maxTrainRows: 20_000 };
    const period = { fromMs: s.times[0], toMs: s.times[2999] + 1 };
    const plain = fitUpdatingFromSeries(s.series, s.corrected, period, LOG, o).archive!;
    const tau2 = [0.001, 0.004, 0.009];
    const grown = fitUpdatingFromSeries(s.series, s.corrected, period, LOG, o, () => false, null, period, tau2).archive!;
    const leadVariance = (a: typeof plain.archive, k: number) => {
      const S = archiveStrata(a);
      const e = Array.from(a.error.subarray(a.groupStart[k * S], a.groupStart[(k + 1) * S]));
      const m = e.reduce((x, y) => x + y, 0) / e.length;
      return e.reduce((x, y) => x + (y - m) ** 2, 0) / (e.length - 1);
    };
    // The archive keeps its errors; the stage widens them by the stored factor g_k, g_k²·V_k = V_k + τ_k².
    expect(Array.from(grown.archive.error)).toEqual(Array.from(plain.archive.error));
    for (let k = 0; k < 3; k++) {
      const v = leadVariance(plain.archive, k);
      expect(grown.archive.leadScale![k] ** 2 * v).toBeCloseTo(v + tau2[k], 10);
    }
    expect(plain.archive.leadScale).toBeUndefined();
    expect(grown.summary.leadGrowth).toEqual(Array.from(grown.archive.leadScale!));
  });
});
