/**
 * Synthetic forecasting process with a known answer (invented data, for tests only).
 * Forecast centre μ(issue, lead) follows a seasonal cycle; the observation is μ + σ_h·ε with
 * σ_h = sigma·(1 + 0.1·lead) and ε ~ N(0, 1). Raw members are μ + bias + spread·σ_h·η_j, so
 * spread = 1 gives members exchangeable with the observation once the bias is removed,
 * spread < 1 a too-narrow ensemble and spread > 1 a too-wide one.
 */
import { buildArchiveFromReforecasts, createPrng, type ErrorArchive } from '../../../src/core/index.ts';

export interface SyntheticOptions {
  nIssues: number;
  nLeads: number;
  nMembers: number;
  seed: number;
  spread: number;
  bias?: number;
  sigma?: number;
  /** Day number of the first issue (default 0). */
  firstDay?: number;
}

export interface SyntheticRun {
  raw: Float64Array; // [(issue·nMembers + member)·nLeads + lead]
  observed: Float64Array; // [issue·nLeads + lead]
  dayOfYear: Uint16Array; // [issue·nLeads + lead]
  /** Centre μ and standard deviation σ_h of the observation's distribution, [issue·nLeads + lead]. */
  centre: Float64Array;
  sd: Float64Array;
}

export function synthetic(o: SyntheticOptions): SyntheticRun {
  const g = createPrng(o.seed);
  const { nIssues: I, nLeads: H, nMembers: M } = o;
  const sigma = o.sigma ?? 10;
  const bias = o.bias ?? 0;
  const raw = new Float64Array(I * M * H);
  const observed = new Float64Array(I * H);
  const dayOfYear = new Uint16Array(I * H);
  const centre = new Float64Array(I * H);
  const sds = new Float64Array(I * H);
  for (let i = 0; i < I; i++) {
    for (let h = 0; h < H; h++) {
      const day = (o.firstDay ?? 0) + i + h;
      const mu = 100 + 30 * Math.sin((2 * Math.PI * day) / 365.25);
      const sd = sigma * (1 + 0.1 * h);
      observed[i * H + h] = mu + sd * g.normal();
      centre[i * H + h] = mu;
      sds[i * H + h] = sd;
      dayOfYear[i * H + h] = (day % 365) + 1;
      for (let m = 0; m < M; m++) raw[(i * M + m) * H + h] = mu + bias + o.spread * sd * g.normal();
    }
  }
  return { raw, observed, dayOfYear, centre, sd: sds };
}

/** Correction standing in for the residual model: subtract a known bias from every member. */
export function subtractBias(bias: number) {
  return (raw: Float64Array, _issue: number, out: Float64Array): void => {
    for (let i = 0; i < raw.length; i++) out[i] = raw[i] - bias;
  };
}

/**
 * Reforecast error archive from a validation run of the same process: per (issue, lead), the
 * error of the corrected ensemble mean.
 */
export function archiveFrom(run: SyntheticRun, nIssues: number, nLeads: number, nMembers: number, bias: number): ErrorArchive {
  const corrected = new Float64Array(nIssues * nLeads);
  for (let i = 0; i < nIssues; i++) {
    for (let h = 0; h < nLeads; h++) {
      let s = 0;
      for (let m = 0; m < nMembers; m++) s += run.raw[(i * nMembers + m) * nLeads + h] - bias;
      corrected[i * nLeads + h] = s / nMembers;
    }
  }
  return buildArchiveFromReforecasts({ nIssues, nLeads, corrected, observed: run.observed, dayOfYear: run.dayOfYear });
}
