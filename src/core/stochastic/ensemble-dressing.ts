import { archiveFromErrorMatrix, type ErrorArchive } from './error-archive.ts';
import { forwardTransform, inverseTransform, resolveTransform, type ErrorTransformSpec } from './error-transform.ts';

/**
 * Per-lead error archive from past ensemble runs that does not count the ensemble spread twice.
 *
 * A member's error against the observation already holds the spread of the members around their
 * mean; dressing every member with such errors adds that spread a second time (Roulston & Smith
 * 2003; Wang & Bishop 2005; Fortin et al. 2006 discuss the choice of dressing errors). Here the
 * archive holds the errors of the ensemble mean, shrunk towards their mean per lead so that the
 * dressed members — an equally weighted mixture of the members, each plus a dressing error —
 * have the variance of the mean's error. The mixture's variance is the members' variance about
 * their mean plus the dressing variance (derived by hand), so
 *   σ_d² = Var(e) − s̄²,  s̄² = mean over issues of (1/M)Σ(T(x_i) − x̄)²,
 *   d = ē + f_h·(e − ē),  e = T(y) − x̄,  x̄ = mean_i T(x_i),  f_h = √(max(0, σ_d²) / Var(e)).
 * Everything is in the archive's transform space. f_h = 0 means the ensemble is already as
 * wide as its errors: the stage then keeps the members' spread and adds only the mean's bias. */

export interface DressingInput {
  nIssues: number;
  nMembers: number;
  nLeads: number;
  /** Flows, layout [(issue·nMembers + member)·nLeads + lead]; null/NaN = missing. */
  members: ArrayLike<number | null>;
  /** Observed flow at each lead's valid time, [issue·nLeads + lead]; null/NaN = missing. */
  observed: ArrayLike<number | null>;
  /** Day of year of each lead's valid time, [issue·nLeads + lead]. */
  dayOfYear: ArrayLike<number>;
  transform?: ErrorTransformSpec;
}

export interface DressingSummary {
  method: 'ensemble-mean errors shrunk to the spread the members lack';
  /** Per lead: the shrink factor f_h, Var(e) and the mean ensemble variance (transform space). */
  byLead: { lead: number; factor: number; errorVariance: number; ensembleVariance: number; issues: number }[];
}

export function dressedArchiveFromRuns(input: DressingInput): { archive: ErrorArchive; dressing: DressingSummary } {
  const { nIssues, nMembers: M, nLeads: H, members, observed, dayOfYear } = input;
  if (members.length !== nIssues * M * H) throw new RangeError('members must hold nIssues × nMembers × nLeads values');
  if (observed.length !== nIssues * H || dayOfYear.length !== nIssues * H) throw new RangeError('observed and dayOfYear must hold nIssues × nLeads values');
  const transform = resolveTransform(input.transform ?? { kind: 'none' }, observed);
  const meanFlow = new Float64Array(nIssues * H).fill(NaN);
  const error = new Float64Array(nIssues * H).fill(NaN);
  const ensVar = new Float64Array(nIssues * H).fill(NaN);
  const count = new Int32Array(nIssues * H);
  for (let is = 0; is < nIssues; is++) {
    for (let h = 0; h < H; h++) {
      let s = 0;
      let s2 = 0;
      let m = 0;
      for (let i = 0; i < M; i++) {
        const x = members[(is * M + i) * H + h];
        if (x === null || !Number.isFinite(x)) continue;
        const z = forwardTransform(transform, x);
        s += z;
        s2 += z * z;
        m++;
      }
      const c = is * H + h;
      if (m === 0) continue;
      const mean = s / m;
      meanFlow[c] = Math.max(0, inverseTransform(transform, mean));
      ensVar[c] = Math.max(0, s2 / m - mean * mean);
      count[c] = m;
      const y = observed[c];
      if (y !== null && Number.isFinite(y)) error[c] = forwardTransform(transform, y) - mean;
    }
  }
  const byLead: DressingSummary['byLead'] = [];
  for (let h = 0; h < H; h++) {
    let n = 0;
    let se = 0;
    let se2 = 0;
    let sv = 0;
    for (let is = 0; is < nIssues; is++) {
      const c = is * H + h;
      if (Number.isNaN(error[c])) continue;
      n++;
      se += error[c];
      se2 += error[c] * error[c];
      sv += ensVar[c];
    }
    const mean = n ? se / n : 0;
    const errorVariance = n > 1 ? (se2 - n * mean * mean) / (n - 1) : 0;
    const ensembleVariance = n ? sv / n : 0;
    const factor = errorVariance > 0 ? Math.sqrt(Math.max(0, errorVariance - ensembleVariance) / errorVariance) : 0;
    for (let is = 0; is < nIssues; is++) {
      const c = is * H + h;
      if (!Number.isNaN(error[c])) error[c] = mean + factor * (error[c] - mean);
    }
    byLead.push({ lead: h + 1, factor, errorVariance, ensembleVariance, issues: n });
  }
  const archive = archiveFromErrorMatrix({ nIssues, nLeads: H, predictor: meanFlow, error, dayOfYear, transform });
  return { archive, dressing: { method: 'ensemble-mean errors shrunk to the spread the members lack', byLead } };
}
