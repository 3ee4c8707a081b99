import { describe, expect, it } from 'vitest';
import { crpsEnsemble } from '../../../src/core/scores/crps.ts';
import { createPrng } from '../../../src/core/prng.ts';
import {
  blockBootstrap,
  blockLengthFor,
  climatologicalRates,
  createWarningVerification,
  exceedanceBrier,
  HindcastWarningCollector,
  persistenceValue,
  prefixSums,
  runHindcast,
  scoresByForecastClass,
  seasonalClimatology,
  thresholdWeightedCrpsSorted,
  twoSidedDriftChecks,
  warningReferences,
  warningRunFromStored,
  type WarningRun,
} from '../../../src/core/verification/index.ts';

const DAY = 86_400_000;

/** Share of n simulated AR(1) series whose 90 % block-bootstrap interval of the mean covers μ. */
function coverage(n: number, blockLength: number, sims: number, seed: number): number {
  const g = createPrng(seed);
  const phi = 0.6;
  const mu = 10;
  let covered = 0;
  for (let s = 0; s < sims; s++) {
    const x = new Float64Array(n);
    let e = g.normal() / Math.sqrt(1 - phi * phi);
    for (let i = 0; i < n; i++) {
      e = phi * e + g.normal();
      x[i] = mu + e;
    }
    const px = prefixSums(x);
    const ones = prefixSums(new Float64Array(n).fill(1));
    const [iv] = blockBootstrap(n, [(r) => r.sum(px) / r.sum(ones)], { blockLength, replicates: 400, level: 0.9, seed: s + 1 });
    if (iv.low <= mu && mu <= iv.high) covered++;
  }
  return covered / sims;
}

describe('moving-block bootstrap (Künsch 1989)', () => {
  it('covers the known mean of an AR(1) series at about its nominal 90 % with blocks longer than the dependence; single-issue blocks fall far short', () => {
    // Simulation: AR(1), φ = 0.6, n = 2000 issues, blocks of 40, 400 series. The coverage share
    // has a binomial sd of about 0.015 around 0.9. Blocks shorter than the dependence make the
    // variance of the mean too small by about 2·Σ k·ρ^k/(L·Σ ρ^|k|) ≈ 5 % here (Künsch 1989; Lahiri
    // 2003, ch. 3, from memory), so coverage sits a little under 0.9: printed 0.8825 on this seed.
    const withBlocks = coverage(2000, 40, 400, 5);
    expect(withBlocks).toBeGreaterThan(0.85);
    expect(withBlocks).toBeLessThan(0.94);
    // Blocks of 1 treat the series as independent: the variance of the mean is (1 + φ)/(1 − φ) = 4
    // times larger than they assume, so a nominal 90 % interval covers about P(|Z| < 1.645/2) ≈ 0.59.
    const iid = coverage(400, 1, 300, 5);
    expect(iid).toBeLessThan(0.72);
  });

  it('block length covers the horizon in issue spacings', () => {
    expect(blockLengthFor([0, DAY, 2 * DAY, 3 * DAY], 10 * DAY)).toBe(10);
    expect(blockLengthFor([0, 2 * DAY, 4 * DAY, 6 * DAY], 5 * DAY)).toBe(3);
    expect(blockLengthFor([0], 5 * DAY)).toBe(1);
  });
});

describe('reference forecasts known at issue time', () => {
  it('seasonal climatology takes only the window around the day of the year, before the cutoff', () => {
    const times: number[] = [];
    const values: number[] = [];
    // Three years of daily values equal to the day's index in the year (0 … 364/365) plus 1000·year.
    for (let t = Date.UTC(2000, 0, 1); t < Date.UTC(2003, 0, 1); t += DAY) {
      const d = new Date(t);
      times.push(t);
      values.push(1000 * (d.getUTCFullYear() - 2000) + (t - Date.UTC(d.getUTCFullYear(), 0, 1)) / DAY);
    }
    const clim = seasonalClimatology(times, values, Date.UTC(2002, 0, 1), 2);
    const v = Array.from(clim.valuesAt(Date.UTC(2005, 6, 1)));
    // 1 July: day index 181 in 2001 and 182 in leap 2000; window ±2 slots of 1/366 year; 2002 after the cutoff.
    expect(v.every((x) => x < 2000)).toBe(true);
    expect(v.length).toBe(10);
    expect(Math.min(...v.filter((x) => x < 1000))).toBeGreaterThanOrEqual(179);
    expect(Math.max(...v.filter((x) => x < 1000))).toBeLessThanOrEqual(185);
    expect(clim.size).toBe(731);
  });

  it('persistence is the last observation at or before issue time', () => {
    const t = [0, 10, 20, 30];
    expect(persistenceValue(t, [1, 2, null, 4], 25)).toBe(2);
    expect(persistenceValue(t, [1, 2, null, 4], 30)).toBe(4);
    expect(persistenceValue(t, [1, 2, null, 4], 25, 5)).toBeNaN();
    expect(persistenceValue(t, [1, 2, 3, 4], -1)).toBeNaN();
  });

  it('climatological rates of the fitting period, counted by hand', () => {
    const [r] = climatologicalRates([1, 5, 2, null, 6, 1, 1], [4], 2);
    expect(r.atLead).toBeCloseTo(2 / 6, 15);
    // Fully observed windows of 2: (1,5) (5,2) (6,1) (1,1): 3 of 4 … no: (1,5) yes, (5,2) yes, (6,1) yes, (1,1) no.
    expect(r.windows).toBe(4);
    expect(r.anyTime).toBeCloseTo(3 / 4, 15);
  });
});

describe('scores by forecast flow class (Lerch et al. 2017: stratify by the forecast)', () => {
  it('classes follow the forecast median, whatever was observed', () => {
    const median = [1, 2, 3, 4, 5, 6, 7, 8, 9];
    const obs = [9, 9, 9, 1, 1, 1, 5, 5, 5];
    const crps = [1, 1, 1, 2, 2, 2, 3, 3, 3];
    const clim = [2, 2, 2, 2, 2, 2, 2, 2, 2];
    const c = scoresByForecastClass(median, obs, crps, clim, [{ label: 'T1', value: 6.5 }]);
    expect(c.map((x) => x.n)).toEqual([3, 3, 3, 3]);
    expect(c[0].crps).toBe(1);
    expect(c[0].crpsSkillClimatology).toBeCloseTo(0.5, 15);
    expect(c[0].medianBias).toBeCloseTo(-7, 15);
    expect(c[2].crpsSkillClimatology).toBeCloseTo(-0.5, 15);
    expect(c[3].class).toBe('forecast median above T1');
  });
});

describe('two-sided drift checks', () => {
  it('flag a biased forecast and an over-dispersed one, not a calibrated one', () => {
    const g = createPrng(3);
    const uniform = Array.from({ length: 2000 }, () => g.nextFloat());
    const ok = twoSidedDriftChecks(uniform, 200, 0.9);
    expect(ok.bias).toBeNull();
    expect(ok.overDispersed).toBe(false);
    // Observations mostly above the forecasts: PIT piles up near 1.
    const high = uniform.map((u) => Math.sqrt(u));
    expect(twoSidedDriftChecks(high, 200, 0.9).bias).toBe('high');
    // Too wide: PIT squeezed to the middle, every observation inside the 90 % band.
    const wide = uniform.map((u) => 0.1 + 0.8 * u);
    const w = twoSidedDriftChecks(wide, 200, 0.9);
    expect(w.overDispersed).toBe(true);
    expect(w.bias).toBeNull();
  });
});

/** Synthetic daily runs: log-flow AR(1); raw members biased high, corrected unbiased, stochastic = 200 draws of the true predictive. */
function synthetic(nIssues: number, H: number, seed = 9) {
  const g = createPrng(seed);
  const t0 = Date.UTC(2020, 0, 1);
  const nHist = 3 * 365;
  const n = nHist + nIssues + H + 1;
  const times = Float64Array.from({ length: n }, (_, i) => t0 + (i - nHist) * DAY);
  const z = new Float64Array(n);
  for (let i = 1; i < n; i++) z[i] = 0.8 * z[i - 1] + 0.4 * g.normal();
  const flow = Float64Array.from(z, (x, i) => 40 * Math.exp(x + 0.5 * Math.sin((2 * Math.PI * i) / 365)));
  const runs: WarningRun[] = [];
  const M = 10;
  const N = 200;
  for (let s = 0; s < nIssues; s++) {
    const i = nHist + s;
    const raw = new Float64Array(M * H);
    const cor = new Float64Array(M * H);
    const sto = new Float64Array(N * H);
    const draw = (out: Float64Array, count: number, scale: number) => {
      for (let j = 0; j < count; j++) {
        let e = z[i];
        for (let k = 0; k < H; k++) {
          e = 0.8 * e + 0.4 * g.normal();
          out[j * H + k] = scale * 40 * Math.exp(e + 0.5 * Math.sin((2 * Math.PI * (i + k + 1)) / 365));
        }
      }
    };
    draw(raw, M, 1.3);
    draw(cor, M, 1);
    draw(sto, N, 1);
    runs.push({
      issueMs: times[i],
      nLeads: H,
      validMs: Float64Array.from({ length: H }, (_, k) => times[i + k + 1]),
      observed: Float64Array.from({ length: H }, (_, k) => flow[i + k + 1]),
      persistence: flow[i],
      sources: [
        { values: raw, count: M, trajectories: true },
        { values: cor, count: M, trajectories: true },
        { values: sto, count: N, trajectories: true },
      ],
    });
  }
  return { runs, times, flow, nHist };
}

describe('warning verification of runs', () => {
  it('scores the same cases as the building blocks, with intervals around each estimate', () => {
    const H = 5;
    const { runs, times, flow, nHist } = synthetic(400, H);
    const thresholds = [
      { label: 'bankfull', value: 60 },
      { label: 'minor', value: 90 },
    ];
    const hist = { t: times.subarray(0, nHist), v: flow.subarray(0, nHist) };
    const w = createWarningVerification({
      sources: ['raw', 'corrected', 'stochastic'],
      thresholds,
      attentionLevel: 0.3,
      climatology: seasonalClimatology(hist.t, hist.v, runs[0].issueMs, 15),
      climatologicalRates: climatologicalRates(hist.v, [60, 90], H),
      stepMs: DAY,
      replicates: 200,
      diagramResamples: 50,
    });
    for (const r of runs) w.addRun(r);
    const rep = w.result();
    expect(rep.runs).toBe(400);
    expect(rep.cases).toBe(400 * H);
    expect(rep.anyTimeRuns).toBe(400);
    expect(rep.settings.blockLength).toBe(H);
    expect(rep.settings.floodRangeFrom).toEqual({ label: 'bankfull', value: 60 });

    // CRPS of the corrected ensemble by lead, recomputed directly.
    let sum = 0;
    for (const r of runs) for (let k = 0; k < H; k++) sum += crpsEnsemble(Array.from({ length: 10 }, (_, j) => r.sources[1].values[j * H + k]), r.observed[k] as number);
    expect(rep.skill.corrected!.crps.value).toBeCloseTo(sum / (400 * H), 10);
    // Lead-time Brier of the corrected ensemble at 60 m³/s = share of members above, as exceedanceBrier.
    const p: number[] = [];
    const o: number[] = [];
    for (const r of runs) {
      for (let k = 0; k < H; k++) {
        let a = 0;
        for (let j = 0; j < 10; j++) if (r.sources[1].values[j * H + k] > 60) a++;
        p.push(a / 10);
        o.push((r.observed[k] as number) > 60 ? 1 : 0);
      }
    }
    const ev = rep.events.find((e) => e.threshold === 'bankfull' && e.event === 'lead-time')!;
    const direct = exceedanceBrier(p, o, ev.climatologicalRate!, 10);
    expect(ev.sources.corrected!.brier.value).toBeCloseTo(direct.brier, 12);
    expect(ev.sources.corrected!.brierSkill.value).toBeCloseTo(direct.skill, 12);

    // Every interval brackets its estimate (percentile intervals need not, but these are smooth statistics).
    const checkScored = (s: { value: number | null; low: number | null; high: number | null }) => {
      expect(s.low).not.toBeNull();
      expect(s.low!).toBeLessThanOrEqual(s.value! + 1e-9);
      expect(s.high!).toBeGreaterThanOrEqual(s.value! - 1e-9);
    };
    for (const src of ['raw', 'corrected', 'stochastic'] as const) {
      const sk = rep.skill[src]!;
      checkScored(sk.crps);
      checkScored(sk.crpsSkillClimatology);
      checkScored(sk.crpsSkillPersistence);
      expect(sk.byLead.map((b) => b.lead)).toEqual([0, 1, 2, 3, 4]);
    }
    const any = rep.events.find((e) => e.threshold === 'bankfull' && e.event === 'any-time')!;
    checkScored(any.sources.stochastic!.brier);
    checkScored(any.sources.stochastic!.roc.area);
    checkScored(any.sources.stochastic!.attention.hitRate);

    // The raw members are 30 % high: worse CRPS than corrected, clearly (interval of the paired difference above 0).
    const d = rep.differences.find((x) => x.first === 'corrected' && x.second === 'raw')!;
    expect(d.crps.value!).toBeLessThan(0);
    expect(d.crps.high!).toBeLessThan(0);
    // The true predictive beats climatology at short leads.
    expect(rep.skill.stochastic!.byLead[0].crpsSkillClimatology.value!).toBeGreaterThan(0.3);
    // Flow classes by the forecast median: three terciles plus one per threshold.
    expect(rep.skill.stochastic!.byForecastClass.length).toBe(5);
    // The stochastic draws come from the truth: its reliability diagram stays within the bars in most bins.
    const bins = any.sources.stochastic!.diagram.filter((b) => b.count >= 20);
    const inside = bins.filter((b) => b.observedFrequency! >= b.consistencyLow! - 1e-9 && b.observedFrequency! <= b.consistencyHigh! + 1e-9);
    expect(inside.length).toBeGreaterThanOrEqual(bins.length - 2);
    // JSON: no NaN anywhere.
    expect(JSON.stringify(rep)).not.toMatch(/NaN|Infinity/);
  });

  it('given probabilities (stored runs) are used as issued; any-time needs every lead observed', () => {
    const w = createWarningVerification({
      sources: ['stochastic'],
      thresholds: [{ label: 'T', value: 5 }],
      attentionLevel: 0.3,
      climatology: null,
      climatologicalRates: null,
      stepMs: DAY,
      replicates: 20,
      diagramResamples: 0,
    });
    const quant = Float64Array.from([1, 2, 3, 4, 6, 7]); // 3 quantiles × 2 leads, [q·H + k]
    w.addRun({ issueMs: 0, nLeads: 2, validMs: [DAY, 2 * DAY], observed: [2, 8], persistence: 1, sources: [{ values: quant, count: 3, trajectories: false, sortedPerLead: true, exceedance: [0.1, 0.6], anyTime: [0.65] }] });
    w.addRun({ issueMs: DAY, nLeads: 2, validMs: [2 * DAY, 3 * DAY], observed: [3, NaN], persistence: 2, sources: [{ values: quant, count: 3, trajectories: false, sortedPerLead: true, exceedance: [0.2, 0.2], anyTime: [0.4] }] });
    const rep = w.result();
    expect(rep.cases).toBe(3);
    const lead = rep.events.find((e) => e.event === 'lead-time')!.sources.stochastic!;
    // (0.1 − 0)² + (0.6 − 1)² + (0.2 − 0)² over 3 cases.
    expect(lead.brier.value).toBeCloseTo((0.01 + 0.16 + 0.04) / 3, 15);
    const any = rep.events.find((e) => e.event === 'any-time')!.sources.stochastic!;
    expect(any.n).toBe(1);
    expect(any.brier.value).toBeCloseTo((0.65 - 1) ** 2, 15);
    expect(any.attention.hits).toBe(1);
    // Persistence: |1 − 2|, |1 − 8|, |2 − 3|; CRPS of the quantile ensembles [1, 3, 6] and [2, 4, 7].
    const c = [crpsEnsemble([1, 3, 6], 2), crpsEnsemble([2, 4, 7], 8), crpsEnsemble([1, 3, 6], 3)];
    const sk = rep.skill.stochastic!;
    expect(sk.crps.value).toBeCloseTo((c[0] + c[1] + c[2]) / 3, 14);
    expect(sk.crpsSkillPersistence.value).toBeCloseTo(1 - (c[0] + c[1] + c[2]) / (1 + 7 + 1), 14);
    expect(sk.crpsSkillClimatology.value).toBeNull();
  });
});

describe('stored runs and references for the warning verification', () => {
  it('a stored run keeps its issued probabilities and its quantiles per lead', () => {
    const run = warningRunFromStored(
      {
        issueMs: 0,
        validMs: [DAY, 2 * DAY],
        raw: [{ values: [1, 2] }, { values: [3, 4] }],
        corrected: [{ values: [1.5, 2.5] }],
        percentiles: [
          [1, 2, 3],
          [4, 5, 6],
        ],
        thresholds: [{ exceedance: [0.1, 0.7], anyTime: 0.75 }],
      },
      (t) => (t === DAY ? 2 : NaN),
      1.2,
    );
    expect(Array.from(run.observed)).toEqual([2, NaN]);
    expect(run.persistence).toBe(1.2);
    expect(Array.from(run.sources[0].values)).toEqual([1, 2, 3, 4]);
    expect(Array.from(run.sources[2].values)).toEqual([1, 4, 2, 5, 3, 6]);
    expect(Array.from(run.sources[2].exceedance!)).toEqual([0.1, 0.7]);
    expect(Array.from(run.sources[2].anyTime!)).toEqual([0.75]);
    expect(run.sources[2].trajectories).toBe(false);
  });

  it('references: climatology before the first issue, rates of the fitting period on the step grid', () => {
    // Daily values 0, 10, 0, 10 … over 20 days, one day missing; fitting period the first 10 days.
    const times: number[] = [];
    const values: number[] = [];
    for (let d = 0; d < 20; d++) {
      if (d === 3) continue;
      times.push(d * DAY);
      values.push(d % 2 ? 10 : 0);
    }
    const ref = warningReferences(times, values, { cutoffMs: 15 * DAY, fitting: { fromMs: 0, toMs: 10 * DAY }, thresholds: [5], horizon: 2, stepMs: DAY });
    expect(ref.ratesFrom).toBe('fitting period');
    // Fitting: days 0–9 without day 3: 9 steps, 4 above (1, 5, 7, 9). Windows of 2 fully observed:
    // (0,1) (1,2) (4,5) (5,6) (6,7) (7,8) (8,9) = 7, all contain an odd day.
    expect(ref.climatologicalRates![0].atLead).toBeCloseTo(4 / 9, 15);
    expect(ref.climatologicalRates![0].windows).toBe(7);
    expect(ref.climatologicalRates![0].anyTime).toBe(1);
    expect(ref.climatology!.size).toBe(14);
  });
});

describe('hindcast cases gathered back into runs', () => {
  it('rebuilds each issue’s member paths, with unobserved leads missing', () => {
    const nIssues = 3;
    const M = 2;
    const H = 3;
    const raw = Float64Array.from({ length: nIssues * M * H }, (_, i) => i);
    const observed = [1, 2, 3, 4, null, 6, 7, 8, 9];
    const runs: WarningRun[] = [];
    const collect = new HindcastWarningCollector(H, (i) => ({ issueMs: i * DAY, validMs: [1, 2, 3].map((k) => (i + k) * DAY), persistence: i }), (r) => runs.push(r));
    runHindcast({ nIssues, nMembers: M, nLeads: H, raw, observed, archive: null, correct: (r, _i, out) => out.set(r.map((v) => v + 100)) }, (c, issue) => collect.add(c, issue));
    collect.finish();
    expect(runs.length).toBe(3);
    expect(Array.from(runs[1].observed)).toEqual([4, NaN, 6]);
    expect(Array.from(runs[1].sources[0].values)).toEqual([6, NaN, 8, 9, NaN, 11]);
    expect(Array.from(runs[1].sources[1].values)).toEqual([106, NaN, 108, 109, NaN, 111]);
    expect(runs[2].persistence).toBe(2);
  });
});

describe('climatology CRPS from prefix sums', () => {
  it('equals the ensemble CRPS and threshold-weighted CRPS of the climatological values', () => {
    const g = createPrng(12);
    const times = Array.from({ length: 3 * 365 }, (_, i) => Date.UTC(2001, 0, 1) + i * DAY);
    const values = times.map(() => 20 * Math.exp(0.5 * g.normal()));
    const clim = seasonalClimatology(times, values, Date.UTC(2010, 0, 1), 10);
    for (const [t, y] of [[Date.UTC(2011, 4, 3), 17], [Date.UTC(2011, 0, 2), 55], [Date.UTC(2011, 11, 30), 3]]) {
      const v = clim.valuesAt(t);
      expect(clim.crpsAt(t, y)).toBeCloseTo(crpsEnsemble(v, y), 10);
      expect(clim.crpsAt(t, y, 25)).toBeCloseTo(thresholdWeightedCrpsSorted(v, y, 25), 10);
    }
  });
});
