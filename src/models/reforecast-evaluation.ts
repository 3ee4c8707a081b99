import { forcingDeviationPaths, type ForcingPaths } from '../core/stochastic/forcing-paths.ts';
import { correctedMember } from '../core/correction/corrected-member.ts';
import { dayOfYearUtc } from '../core/day-of-year.ts';
import { dressedArchiveFromRuns, type DressingSummary } from '../core/stochastic/ensemble-dressing.ts';
import { casesInLeadGroup, type ErrorArchive } from '../core/stochastic/error-archive.ts';
import type { ErrorTransformSpec } from '../core/stochastic/error-transform.ts';
import type { ReforecastIssue } from '../core/features/features.ts';
import { reforecastInputs, requiredRunInputs, specForcings, type ResidualSpec } from '../core/features/model-inputs.ts';
import type { ArchiveSeries, ReforecastSet } from '../core/archive-types.ts';
import { archiveSummary, type ResidualPredictor } from './residual-evaluation.ts';

/** Fewer usable past runs than this and no per-lead archive is built (common practice, like the hindcast's reference minimum). */
export const MIN_PER_LEAD_ISSUES = 20;

export interface PerLeadSummary {
  nLeads: number;
  /** Past runs with at least one case, and past runs given (issued in the period). */
  issues: number;
  issuesGiven: number;
  members: number;
  cases: number;
  templates: number;
  templateLength: number;
  transform: unknown;
  /** How the ensemble-mean errors were shrunk so the spread is not counted twice. */
  dressing: DressingSummary;
}

export interface ReforecastScores {
  issues: number;
  members: number;
  cases: number;
  /** Residual RMSE (observed − member) of the raw and corrected reforecast members, over all leads and per lead. */
  residualRmse: { before: number | null; after: number | null };
  byLead: { lead: number; cases: number; rmseBefore: number | null; rmseAfter: number | null }[];
  note: string;
}

export interface ReforecastEvaluation {
  /** null when the past runs do not make a usable archive; `reason` says why. */
  archives: { corrected: ErrorArchive; raw: ErrorArchive; correctedSummary: PerLeadSummary; rawSummary: PerLeadSummary } | null;
  reason: string | null;
  scores: ReforecastScores | null;
  /**
   * The past runs' raw and corrected members as evaluated (issue-time updating trains on them):
   * rows = used issue × kept member, [(u·members.length + j)·nLeads + lead]. Absent when none.
   */
  values?: PastRunValues;
  /** Forecast-forcing deviation paths, one per past run complete at every lead; absent when none. */
  forcingPaths?: ForcingPaths;
}

export interface PastRunValues {
  nLeads: number;
  /** Index into series.times of each used issue. */
  issueIndex: number[];
  /** Index into series.members of each kept member. */
  members: number[];
  raw: Float64Array;
  corrected: Float64Array;
}

/** Said wherever reforecast-based results are shown: the archive stores no forecast forcings. */
export const PAST_FORCINGS_NOTE =
  "Some past runs have no stored forecast forcings (post them with the runs): their feature rows use the archived (observed) forcings at the lead times, which the runs did not have when issued, so those errors lack the forecast-forcing part; warm-up values come from the members' continuous simulations before issue time.";

/** Said when every past run came with the forecast forcings it was driven by. */
export const FORECAST_FORCINGS_NOTE =
  "The past runs' feature rows use the forecast forcings each run was driven by at its lead times; warm-up values come from the members' continuous simulations and the archived forcings before issue time.";

/**
 * The horizon of the per-lead archive: the longest lead that at least half of the past runs reach
 * (a few longer runs would otherwise leave no issue row complete, and so no Schaake template).
 */
export function perLeadHorizon(set: ReforecastSet): number {
  const nM = set.memberIds.length;
  const reach: number[] = [];
  for (let s = 0; s < set.issueTimes.length; s++) {
    let last = 0;
    for (let m = 0; m < nM; m++) {
      const base = (s * nM + m) * set.nLeads;
      for (let h = set.nLeads - 1; h >= last; h--) {
        if (Number.isFinite(set.values[base + h])) {
          last = h + 1;
          break;
        }
      }
    }
    if (last > 0) reach.push(last);
  }
  if (!reach.length) return 0;
  reach.sort((a, b) => b - a);
  return reach[Math.ceil(reach.length / 2) - 1];
}

interface Layout {
  H: number;
  stepMs: number;
  /** Per used issue: its index in set.issueTimes and in series.times. */
  issue: number[];
  at: number[];
  /** Kept members: index in set.memberIds and in series.members (−1 when the member has no continuous simulation). */
  setMember: number[];
  seriesMember: number[];
}

function layout(series: ArchiveSeries, set: ReforecastSet, needSimulation: boolean): Layout | string {
  const H = perLeadHorizon(set);
  if (H < 1) return 'the past runs hold no value';
  const stepMs = series.stepSeconds * 1000;
  const t0 = series.times[0];
  const issue: number[] = [];
  const at: number[] = [];
  set.issueTimes.forEach((t, s) => {
    const i = (t - t0) / stepMs;
    // Issues off the archive's time grid cannot be lined up with its observations.
    if (Number.isInteger(i) && i >= 0 && i < series.times.length) {
      issue.push(s);
      at.push(i);
    }
  });
  const bySeries = new Map(series.members.map((m, k) => [m.id, k]));
  const usable = set.memberIds.map((id, m) => ({ m, k: bySeries.get(id) ?? -1 })).filter((x) => !needSimulation || x.k >= 0);
  if (!usable.length) return "no member of the past runs has a continuous simulation (needed for the warm-up)";
  // Every member: the archive holds one case per issue and lead (the ensemble mean's error), and
  // the mean and spread it is dressed by are best taken over the whole ensemble.
  return { H, stepMs, issue, at, setMember: usable.map((x) => x.m), seriesMember: usable.map((x) => x.k) };
}

/** Observed flow and day of year at every (row, lead) valid time; rows = used issue × kept member. */
function observedMatrix(series: ArchiveSeries, set: ReforecastSet, L: Layout) {
  const nK = L.setMember.length;
  const nRows = L.issue.length * nK;
  const observed = new Float64Array(nRows * L.H).fill(NaN);
  const dayOfYear = new Uint16Array(nRows * L.H);
  const raw = new Float64Array(nRows * L.H).fill(NaN);
  const nM = set.memberIds.length;
  L.issue.forEach((s, u) => {
    for (let j = 0; j < nK; j++) {
      const row = (u * nK + j) * L.H;
      const src = (s * nM + L.setMember[j]) * set.nLeads;
      for (let h = 0; h < L.H; h++) {
        const v = L.at[u] + h + 1;
        observed[row + h] = v < series.times.length ? series.observed[v] : NaN;
        dayOfYear[row + h] = dayOfYearUtc(set.issueTimes[s] + (h + 1) * L.stepMs);
        raw[row + h] = set.values[src + h];
      }
    }
  });
  return { nRows, observed, dayOfYear, raw };
}

/** Used issues with at least one case (a value and an observation at the same cell). */
function issuesWithCases(values: Float64Array, observed: Float64Array, L: Layout): number {
  const size = L.setMember.length * L.H;
  let issues = 0;
  for (let u = 0; u < L.issue.length; u++) {
    for (let i = u * size; i < (u + 1) * size; i++) {
      if (Number.isFinite(values[i]) && Number.isFinite(observed[i])) {
        issues++;
        break;
      }
    }
  }
  return issues;
}

function summaryOf(a: ErrorArchive, dressing: DressingSummary, L: Layout, given: number, issues: number): PerLeadSummary {
  return { nLeads: a.nLeads, issues, issuesGiven: given, members: L.setMember.length, ...archiveSummary(a), dressing };
}

/**
 * The dressed per-lead archive of member values laid out as rows of (issue, member): one case per
 * issue and lead, the ensemble mean's error shrunk to the spread the members lack (see
 * ensemble-dressing.ts).
 */
function dressedArchive(values: Float64Array, observed: Float64Array, dayOfYear: Uint16Array, L: Layout, transform: ErrorTransformSpec) {
  const nK = L.setMember.length;
  const nIssues = L.issue.length;
  // observed and dayOfYear repeat per member row: take each issue's first row.
  const perIssue = <T extends Float64Array | Uint16Array>(a: T, make: (n: number) => T): T => {
    const out = make(nIssues * L.H);
    for (let u = 0; u < nIssues; u++) out.set(a.subarray(u * nK * L.H, u * nK * L.H + L.H), u * L.H);
    return out;
  };
  return dressedArchiveFromRuns({
    nIssues,
    nMembers: nK,
    nLeads: L.H,
    members: values,
    observed: perIssue(observed, (n) => new Float64Array(n)),
    dayOfYear: perIssue(dayOfYear, (n) => new Uint16Array(n)),
    transform,
  });
}

/** Checks that an archive can serve any run up to its horizon: cases at every lead and a template. */
function unusable(a: ErrorArchive, issues: number): string | null {
  if (issues < MIN_PER_LEAD_ISSUES) return `only ${issues} past runs have observed leads; at least ${MIN_PER_LEAD_ISSUES} are needed`;
  for (let h = 0; h < a.nLeads; h++) if (casesInLeadGroup(a, h) === 0) return `no case at lead ${h + 1}`;
  if (!a.templateStart.length) return 'no past run has its leads observed nearly completely (no Schaake template)';
  return null;
}

/**
 * Per-lead error archives from the gauge's stored past runs (reforecasts): each issue is laid out
 * like a served run — the members' continuous simulations up to issue time as warm-up, then the
 * stored value per lead — corrected by the residual model(s) (src/core/correction/corrected-member.ts: each
 * model's value clipped at zero, a bundle's mean over models, as serving and the lead-free archive),
 * and compared with the observations at the valid times. Each issue is
 * one row of the issue × lead matrix: its case at a lead is the ensemble mean's error, shrunk so
 * the members' own spread is not counted twice (ensemble-dressing.ts); each (nearly) complete row
 * is a Schaake template. The raw members dressed the same way make the degraded-mode archive.
 * Forcings at the lead times are the forecast forcings the run was driven by when they were
 * posted with it, else the archived
 * (observed) ones, and the scores' note says which (PAST_FORCINGS_NOTE).
 */
export async function evaluateReforecasts(
  series: ArchiveSeries,
  set: ReforecastSet,
  spec: ResidualSpec,
  predictors: ResidualPredictor[],
  options: { transform: ErrorTransformSpec },
): Promise<ReforecastEvaluation> {
  const L = layout(series, set, true);
  if (typeof L === 'string') return { archives: null, reason: L, scores: null };
  const { nRows, observed, dayOfYear, raw } = observedMatrix(series, set, L);
  const corrected = new Float64Array(nRows * L.H).fill(NaN);
  // The same issues re-run on the members' continuous simulations with the observed forcings: the
  // forecast-forcing deviation paths (src/core/stochastic/forcing-paths.ts) compare the two.
  const simulated = new Float64Array(nRows * L.H).fill(NaN);
  const simulatedRaw = new Float64Array(nRows * L.H).fill(NaN);
  const nT = series.times.length;
  L.at.forEach((i, u) =>
    L.seriesMember.forEach((k, j) => {
      for (let h = 0; h < L.H; h++) if (i + h + 1 < nT) simulatedRaw[(u * L.seriesMember.length + j) * L.H + h] = series.members[k].values[i + h + 1];
    }),
  );
  const need = requiredRunInputs(spec);
  const W = Math.max(need.simStepsToIssue, ...need.forcings.map((f) => f.stepsToIssue));
  const nK = L.setMember.length;
  const n = series.times.length;
  const window = (values: Float64Array, i: number, len: number) => {
    const out = new Float64Array(len).fill(NaN);
    for (let j = 0; j < len; j++) {
      const k = i - W + 1 + j;
      if (k >= 0 && k < n) out[j] = values[k];
    }
    return out;
  };
  let observedForcingsUsed = false;
  // Corrects a batch's members (bundle mean of clipped corrections) into `into`, cell by cell.
  const correctBatch = async (batch: ReforecastIssue[], u0: number, values: Float64Array, into: Float64Array) => {
    const rows = reforecastInputs(spec, batch);
    if (!rows.nRows) return;
    const cells = Int32Array.from({ length: rows.nRows }, (_, r) => ((u0 + rows.issue[r]) * nK + rows.member[r]) * L.H + rows.lead[r] - 1);
    // A bundle's member: the mean of each model's clipped corrected value (src/core/correction/corrected-member.ts).
    const sum = new Float64Array(rows.nRows);
    for (const predict of predictors) {
      const out = await predict(rows.rows, rows.nRows, rows.nFeatures);
      for (let r = 0; r < rows.nRows; r++) {
        if (!Number.isFinite(out[r])) throw new Error(`the residual model returned a non-finite value on a past run (issued ${new Date(batch[rows.issue[r]].issueTime).toISOString()}, lead ${rows.lead[r]})`);
        sum[r] += correctedMember(values[cells[r]], out[r]);
      }
    }
    for (let r = 0; r < rows.nRows; r++) into[cells[r]] = sum[r] / predictors.length;
  };
  // Issues in batches, so the feature rows stay a few MB whatever the archive's size.
  const perBatch = Math.max(1, Math.floor(50_000 / (nK * L.H)));
  for (let u0 = 0; u0 < L.issue.length; u0 += perBatch) {
    const batch: ReforecastIssue[] = [];
    const batchSim: ReforecastIssue[] = [];
    for (let u = u0; u < Math.min(L.issue.length, u0 + perBatch); u++) {
      const i = L.at[u];
      const forcings: Record<string, Float64Array> = {};
      const observedForcings: Record<string, Float64Array> = {};
      for (const name of specForcings(spec)) {
        if (!series.forcings[name]) continue;
        forcings[name] = window(series.forcings[name], i, W + L.H);
        observedForcings[name] = forcings[name].slice();
        // At the lead times, the forcing the run was driven by when stored (never one observed later).
        const forecast = set.forcings?.[name];
        if (forecast) {
          for (let h = 0; h < L.H; h++) {
            const v = forecast[L.issue[u] * set.nLeads + h];
            if (Number.isFinite(v)) forcings[name][W + h] = v;
            else observedForcingsUsed = true;
          }
        } else observedForcingsUsed = true;
      }
      batch.push({
        issueTime: set.issueTimes[L.issue[u]],
        nLeads: L.H,
        members: L.seriesMember.map((k, j) => {
          const values = window(series.members[k].values, i, W + L.H);
          values.set(raw.subarray((u * nK + j) * L.H, (u * nK + j + 1) * L.H), W);
          return values;
        }),
        forcings,
        issueObservation: series.observed[i],
        obs: observed.subarray(u * nK * L.H, u * nK * L.H + L.H),
      });
      batchSim.push({ ...batch[batch.length - 1], members: L.seriesMember.map((k) => window(series.members[k].values, i, W + L.H)), forcings: observedForcings });
    }
    await correctBatch(batch, u0, raw, corrected);
    // The simulations' own values stand where the past run's stored values stood.
    await correctBatch(batchSim, u0, simulatedRaw, simulated);
  }
  // Raw errors on the same cases as the corrected ones, as in the lead-free archives.
  const rawMasked = raw.map((v, i) => (Number.isFinite(corrected[i]) ? v : NaN));
  const issues = issuesWithCases(corrected, observed, L);
  const scores = scoreReforecasts(rawMasked, corrected, observed, L, issues, observedForcingsUsed ? PAST_FORCINGS_NOTE : FORECAST_FORCINGS_NOTE);
  if (scores.cases === 0) return { archives: null, reason: 'no past run has a corrected value with an observation', scores: null };
  const values: PastRunValues = { nLeads: L.H, issueIndex: L.at, members: L.seriesMember, raw: rawMasked, corrected };
  const cor = dressedArchive(corrected, observed, dayOfYear, L, options.transform);
  const paths = forcingDeviationPaths({ forecast: corrected, simulated, nIssues: L.issue.length, nMembers: nK, nLeads: L.H, transform: cor.archive.transform });
  const forcingPaths = paths.values.length ? { forcingPaths: paths } : {};
  const reason = unusable(cor.archive, issues);
  if (reason) return { archives: null, reason, scores, values, ...forcingPaths };
  const rawArchive = dressedArchive(rawMasked, observed, dayOfYear, L, options.transform);
  const given = set.issueTimes.length;
  return {
    archives: {
      corrected: cor.archive,
      raw: rawArchive.archive,
      correctedSummary: summaryOf(cor.archive, cor.dressing, L, given, issues),
      rawSummary: summaryOf(rawArchive.archive, rawArchive.dressing, L, given, issues),
    },
    reason: null,
    scores,
    values,
    ...forcingPaths,
  };
}

/** The raw members' per-lead archive alone (degraded mode without any model): every raw value with an observation. */
export function rawArchiveFromReforecasts(
  series: Pick<ArchiveSeries, 'stepSeconds' | 'times' | 'observed' | 'members'>,
  set: ReforecastSet,
  options: { transform: ErrorTransformSpec },
): { archive: ErrorArchive; summary: PerLeadSummary } | { archive: null; reason: string } {
  const L = layout(series as ArchiveSeries, set, false);
  if (typeof L === 'string') return { archive: null, reason: L };
  const { observed, dayOfYear, raw } = observedMatrix(series as ArchiveSeries, set, L);
  const { archive: a, dressing } = dressedArchive(raw, observed, dayOfYear, L, options.transform);
  const summary = summaryOf(a, dressing, L, set.issueTimes.length, issuesWithCases(raw, observed, L));
  const reason = unusable(a, summary.issues);
  return reason ? { archive: null, reason } : { archive: a, summary };
}

const rmse = (sumSq: number, n: number): number | null => (n ? Math.sqrt(sumSq / n) : null);

function scoreReforecasts(raw: Float64Array, corrected: Float64Array, observed: Float64Array, L: Layout, issues: number, note: string): ReforecastScores {
  const H = L.H;
  const before = new Float64Array(H);
  const after = new Float64Array(H);
  const count = new Float64Array(H);
  for (let i = 0; i < corrected.length; i++) {
    const y = observed[i];
    if (!Number.isFinite(corrected[i]) || !Number.isFinite(y)) continue;
    const h = i % H;
    before[h] += (y - raw[i]) ** 2;
    after[h] += (y - corrected[i]) ** 2;
    count[h]++;
  }
  let b = 0;
  let a = 0;
  let n = 0;
  const byLead = Array.from({ length: H }, (_, h) => {
    b += before[h];
    a += after[h];
    n += count[h];
    return { lead: h + 1, cases: count[h], rmseBefore: rmse(before[h], count[h]), rmseAfter: rmse(after[h], count[h]) };
  });
  return { issues, members: L.setMember.length, cases: n, residualRmse: { before: rmse(b, n), after: rmse(a, n) }, byLead, note };
}
