// Fits the issue-time updater of a model version from pseudo-forecasts of the validation period:
// the residual-corrected continuous simulations read as forecasts issued every step. Candidates
// with lead in their structure are fitted on block A, tree candidates stop early on block B, and
// all are scored per lead on block C, which neither fitting nor early stopping saw.
import { correctedMember } from '../core/correction/corrected-member.ts';
import { dayOfYearUtc } from '../core/day-of-year.ts';
import { archiveFromErrorMatrix, archiveStrata, stratumOf, type ErrorArchive } from '../core/stochastic/error-archive.ts';
import type { ErrorTransform } from '../core/stochastic/error-transform.ts';
import { continuousInputs, type ResidualSpec } from '../core/features/model-inputs.ts';
import { createPrng } from '../core/prng.ts';
import {
  ar1Multipliers,
  buildPastRunCube,
  buildPseudoForecasts,
  fitAr1,
  fitPhiPerLead,
  multiplierPredictor,
  pairedLeadDifference,
  scoreShifts,
  shiftInTransform,
  transformedError,
  type LeadScore,
  type PseudoForecastCube,
  type ShiftPredictor,
  type UpdatingModel,
} from '../core/correction/updating.ts';
import type { PastRunValues } from './reforecast-evaluation.ts';
import type { ArchiveSeries, Period } from '../core/archive-types.ts';
import { archiveMembers, type ResidualPredictor } from './residual-evaluation.ts';
import { predictTrees, trainGradientBoosting, type TreeModel } from './trees/index.ts';

export type UpdatingMode = 'auto' | 'on' | 'off';

export interface UpdatingOptions {
  mode: UpdatingMode;
  /** Lead times (steps) the updater and its error archive cover. */
  leads: number;
  /** Lead bands for the per-band tree candidate, e.g. [[1, 2], [3, 5], [6, 10]]; null = derived from leads. */
  leadBands: [number, number][] | null;
  /** Earlier raw errors given to the tree candidates besides the one at issue time. */
  history: number;
  /** Fit and score the tree candidates (slower; they are measured, not served). */
  trees: boolean;
  seed: number;
  maxTrainRows: number;
}

export interface CandidateScore {
  name: 'none' | 'ar1' | 'phi-per-lead' | 'trees-lead-feature' | 'trees-lead-bands';
  /** Whether the service can apply it to runs (the closed-form ones). */
  servable: boolean;
  /** Mean over leads of the per-lead CRPS on block C (m³/s). */
  meanCrps: number | null;
  byLead: LeadScore[];
  /** The same scores on the real past runs issued in block C (closed-form candidates; absent without past runs there). */
  pastRuns?: { issues: number; meanCrps: number | null; byLead: LeadScore[] };
  phi?: number[];
}

export interface UpdatingFit {
  mode: UpdatingMode;
  /** The updater to store with the version, or null when updating is off (reason says why). */
  model: UpdatingModel | null;
  reason: string | null;
  blocks: { fit: { from: string; to: string; issues: number }; earlyStopping: { from: string; to: string; issues: number }; heldOut: { from: string; to: string; issues: number } };
  members: number;
  candidates: CandidateScore[];
  /** The candidate with the lowest mean CRPS on block C, and the one served (best closed-form). */
  best: CandidateScore['name'];
  served: CandidateScore['name'] | null;
  /** Per lead: CRPS without updating minus with the served candidate on block C, its standard error, and whether the lead updates. */
  leads: { lead: number; crpsGain: number | null; se: number | null; pastRunGain?: number | null; pastRunSe?: number | null; on: boolean }[];
  /** Whether auto also checked the leads on block C's past runs (at least 50 of them): a loss beyond 2 SE there switches a lead off. */
  checkedOnPastRuns: boolean;
  /** Training data by source: pseudo-forecast issues and real past runs (issues) in each block. */
  sources: { pseudoForecasts: { fit: number; earlyStopping: number; heldOut: number }; pastRuns: { fit: number; earlyStopping: number; heldOut: number } };
  note: string;
  /**
   * Error archive of the updated members (per lead, from the residual fit's archive block),
   * and each archive case's issue-time error ε0 = T(obs) − T(corrected) in the archive's
   * transform, aligned with the archive's cases (archive.error[i] ↔ issueError[i]). null when off.
   */
  archive: { archive: ErrorArchive; issueError: Float64Array; summary: Record<string, unknown> } | null;
}

export const PSEUDO_FORECAST_NOTE =
  'Pseudo-forecasts are the continuous simulations read as forecasts issued every step: they carry the model error but no forecast-forcing error, which real past runs also carry; so at longer leads they overstate what updating gains.';

/** Default updater horizon: the archive's template length, at most ten days of steps (10 daily, 240 hourly). */
export function defaultUpdatingLeads(stepSeconds: number, templateLength: number): number {
  return Math.max(1, Math.min(templateLength, Math.round((10 * 86400) / stepSeconds)));
}

/** Default lead bands for the per-band tree candidate: 1–2, 3–5, 6–10, 11–20, … up to leads. */
export function defaultLeadBands(leads: number): [number, number][] {
  const edges = [1, 3, 6, 11, 21, 41, 81, 161];
  const bands: [number, number][] = [];
  for (let i = 0; i < edges.length && edges[i] <= leads; i++) bands.push([edges[i], Math.min(leads, (edges[i + 1] ?? Infinity) - 1)]);
  return bands;
}

const iso = (ms: number) => new Date(ms).toISOString().replace('.000Z', 'Z');

/** Residual-corrected continuous simulation of each member over the period (NaN outside it). */
export async function correctedSeries(series: ArchiveSeries, spec: ResidualSpec, period: Period, predictors: ResidualPredictor[]): Promise<Float64Array[]> {
  const out: Float64Array[] = [];
  for (const member of series.members) {
    const sim = member.values;
    const all = continuousInputs(spec, { times: series.times, sim, forcings: series.forcings, obs: sim });
    const pick: number[] = [];
    for (let r = 0; r < all.nRows; r++) {
      const t = series.times[all.index[r]];
      if (t >= period.fromMs && t < period.toMs) pick.push(r);
    }
    const cor = new Float64Array(series.times.length).fill(NaN);
    if (pick.length) {
      const nF = all.nFeatures;
      const x = new Float32Array(pick.length * nF);
      pick.forEach((r, j) => x.set(all.rows.subarray(r * nF, (r + 1) * nF), j * nF));
      // The corrected member as everywhere else: each model's value clipped, a bundle's the mean.
      const sum = new Float64Array(pick.length);
      for (const predict of predictors) {
        const p = await predict(x, pick.length, nF);
        pick.forEach((r, j) => {
          sum[j] += correctedMember(sim[all.index[r]], p[j]);
        });
      }
      pick.forEach((r, j) => {
        const v = sum[j] / predictors.length;
        cor[all.index[r]] = Number.isFinite(v) ? v : NaN;
      });
    }
    out.push(cor);
  }
  return out;
}

/** Tree features of the cube rows: ε0, raw errors t … t − history, lead, simulated flow and T(corrected) − T(sim) at the lead. */
function treeRows(cube: PseudoForecastCube, tr: ErrorTransform, issues: number[], leadFrom: number, leadTo: number): { x: Float32Array; y: Float64Array; n: number; nF: number; slot: Int32Array } {
  const { nMembers: M, nLeads: L, history: hist } = cube;
  const nF = 1 + (hist + 1) + 3;
  const cap = issues.length * M * (leadTo - leadFrom + 1);
  const x = new Float32Array(cap * nF);
  const y = new Float64Array(cap);
  const slot = new Int32Array(cap);
  let r = 0;
  issues.forEach((i, u) => {
    for (let m = 0; m < M; m++) {
      const e0 = cube.issueError[i * M + m];
      if (!Number.isFinite(e0)) continue;
      for (let k = leadFrom; k <= leadTo; k++) {
        const c = (i * M + m) * L + k - 1;
        const cor = cube.corrected[c];
        const sim = cube.simulated[c];
        if (!Number.isFinite(cor) || !Number.isFinite(sim)) continue;
        let o = r * nF;
        x[o++] = e0;
        for (let j = 0; j <= hist; j++) x[o++] = cube.rawError[(i * M + m) * (hist + 1) + j];
        x[o++] = k;
        x[o++] = sim;
        x[o++] = transformedError(tr, cor, sim);
        y[r] = cube.target[c];
        slot[r] = (u * M + m) * L + k - 1;
        r++;
      }
    }
  });
  return { x: x.subarray(0, r * nF), y: y.subarray(0, r), n: r, nF, slot: slot.subarray(0, r) };
}

function finiteRows(t: ReturnType<typeof treeRows>): ReturnType<typeof treeRows> {
  const keep: number[] = [];
  for (let r = 0; r < t.n; r++) if (Number.isFinite(t.y[r])) keep.push(r);
  const x = new Float32Array(keep.length * t.nF);
  keep.forEach((r, j) => x.set(t.x.subarray(r * t.nF, (r + 1) * t.nF), j * t.nF));
  return { x, y: Float64Array.from(keep, (r) => t.y[r]), n: keep.length, nF: t.nF, slot: Int32Array.from(keep, (r) => t.slot[r]) };
}

function sampleRows(t: ReturnType<typeof treeRows>, max: number, seed: number): ReturnType<typeof treeRows> {
  if (t.n <= max) return t;
  const prng = createPrng(seed, 11);
  const idx = Int32Array.from({ length: t.n }, (_, i) => i);
  for (let i = 0; i < max; i++) {
    const j = i + Math.floor(prng.nextFloat() * (t.n - i));
    [idx[i], idx[j]] = [idx[j], idx[i]];
  }
  const chosen = idx.subarray(0, max).sort();
  const x = new Float32Array(max * t.nF);
  chosen.forEach((r, j) => x.set(t.x.subarray(r * t.nF, (r + 1) * t.nF), j * t.nF));
  return { x, y: Float64Array.from(chosen, (r) => t.y[r]), n: max, nF: t.nF, slot: Int32Array.from(chosen, (r) => t.slot[r]) };
}

const TREE_PARAMS = { nRounds: 300, learningRate: 0.08, maxDepth: 4, patience: 25, minChildWeight: 20 };

/** A tree candidate over the given lead bands (one band = one model with lead as a feature). */
function treePredictor(cube: PseudoForecastCube, tr: ErrorTransform, A: number[], B: number[], bands: [number, number][], o: UpdatingOptions, shouldStop: () => boolean): ShiftPredictor {
  const L = cube.nLeads;
  bands = bands.filter(([a]) => a <= L).map(([a, b]) => [a, Math.min(b, L)] as [number, number]);
  const models: { band: [number, number]; model: TreeModel }[] = [];
  const perBand = Math.max(1000, Math.floor(o.maxTrainRows / bands.length));
  bands.forEach((band, b) => {
    if (shouldStop()) return;
    const train = sampleRows(finiteRows(treeRows(cube, tr, A, band[0], band[1])), perBand, o.seed + b);
    const valid = sampleRows(finiteRows(treeRows(cube, tr, B, band[0], band[1])), Math.max(1000, Math.floor(perBand / 2)), o.seed + 100 + b);
    if (train.n < 50 || valid.n < 10) return;
    models.push({ band, model: trainGradientBoosting({ x: train.x, nRows: train.n, nFeatures: train.nF, y: train.y, valid: { x: valid.x, nRows: valid.n, y: valid.y } }, TREE_PARAMS, o.seed + b, undefined, shouldStop) });
  });
  return (c, issues) => {
    const out = new Float64Array(issues.length * c.nMembers * c.nLeads).fill(0);
    for (const { band, model } of models) {
      const rows = treeRows(c, tr, Array.from(issues), band[0], band[1]);
      if (!rows.n) continue;
      const p = predictTrees(model, rows.x, rows.n);
      for (let r = 0; r < rows.n; r++) out[rows.slot[r]] = p[r];
    }
    return out;
  };
}

const meanOf = (s: LeadScore[]) => {
  const v = s.map((x) => x.crps).filter((x): x is number => x !== null);
  return v.length ? v.reduce((a, b) => a + b, 0) / v.length : null;
};

/**
 * The updater of a version. `transform` is the version's (resolved) error transform, so the
 * updater, its archive and the lead-free archive share one error scale.
 */
export async function fitUpdating(
  series: ArchiveSeries,
  spec: ResidualSpec,
  validation: Period,
  predictors: ResidualPredictor[],
  transform: ErrorTransform,
  o: UpdatingOptions,
  shouldStop: () => boolean = () => false,
  pastRuns: PastRunValues | null = null,
  archivePeriod: Period = validation,
  forcingErrorVariance: ArrayLike<number> | null = null,
): Promise<UpdatingFit> {
  const corrected = await correctedSeries(series, spec, validation, predictors);
  return fitUpdatingFromSeries(series, corrected, validation, transform, o, shouldStop, pastRuns, archivePeriod, forcingErrorVariance);
}

/** Past runs block C needs before auto also checks updating on them (common practice, our rule of thumb). */
const MIN_PAST_RUNS_TO_CHECK = 50;

/** Bound on the updated archive's cases (size in the store and in each correction worker). */
const MAX_ARCHIVE_CASES = 1_000_000;

/** The same from the corrected series (tests pass synthetic ones). */
export function fitUpdatingFromSeries(
  series: Pick<ArchiveSeries, 'times' | 'observed' | 'members' | 'stepSeconds'>,
  corrected: Float64Array[],
  validation: Period,
  transform: ErrorTransform,
  o: UpdatingOptions,
  shouldStop: () => boolean = () => false,
  pastRuns: PastRunValues | null = null,
  /** Issues in this period make the updated archive (the residual fit's held-out archive block). */
  archivePeriod: Period = validation,
  /** Per lead, the forecast-forcing error variance τ² past runs show (transform space); null = none known. */
  forcingErrorVariance: ArrayLike<number> | null = null,
): UpdatingFit {
  const L = o.leads;
  const { times, observed } = series;
  const inPeriod: number[] = [];
  for (let t = 0; t < times.length; t++) if (times[t] >= validation.fromMs && times[t] < validation.toMs && Number.isFinite(observed[t])) inPeriod.push(t);
  if (inPeriod.length < 10 * L) throw new Error(`updating needs at least ${10 * L} observed steps in the validation period (10 per lead time); it holds ${inPeriod.length}`);
  // Blocks by date: A fits, B stops the trees early, C scores. A gap of L steps after A and B keeps
  // their targets out of the next block.
  const cut1 = Math.floor(inPeriod.length * 0.5);
  const cut2 = Math.floor(inPeriod.length * 0.7);
  const lastT = times.length;
  const before = (idx: number[], end: number) => idx.filter((t) => t + L < end);
  const Aall = before(inPeriod.slice(0, cut1), inPeriod[cut1]);
  const Ball = before(inPeriod.slice(cut1, cut2), inPeriod[cut2]);
  const Call = inPeriod.slice(cut2).filter((t) => t < lastT);
  // Bounded memory: members × issues × leads at most ~4 million cells per cube.
  const M0 = series.members.length;
  const budget = 4_000_000;
  const issuesAll = Aall.length + Ball.length + Call.length;
  const keepM = Math.min(M0, Math.max(8, Math.floor(budget / (issuesAll * L))));
  const members = spreadIndices(M0, keepM);
  const stride = Math.max(1, Math.ceil((issuesAll * keepM * L) / budget));
  const thin = (a: number[]) => a.filter((_, j) => j % stride === 0);
  const [A, B, C] = [thin(Aall), thin(Ball), thin(Call)];
  const issueIndex = [...A, ...B, ...C];
  const cube = buildPseudoForecasts({
    transform,
    observed,
    simulated: members.map((m) => series.members[m].values),
    corrected: members.map((m) => corrected[m]),
    issueIndex,
    nLeads: L,
    history: o.history,
  });
  const idxA = A.map((_, j) => j);
  const idxB = B.map((_, j) => A.length + j);
  const idxC = C.map((_, j) => A.length + B.length + j);
  const block = (ix: number[]) => ({ from: iso(times[issueIndex[ix[0]]]), to: iso(times[issueIndex[ix[ix.length - 1]]]), issues: ix.length });

  // Real past runs issued in the validation period join, marked as such, in the block of their issue time.
  let past: PseudoForecastCube | null = null;
  const pastA: number[] = [];
  const pastB: number[] = [];
  const pastC: number[] = [];
  if (pastRuns && pastRuns.issueIndex.length) {
    past = buildPastRunCube({
      transform,
      observed,
      correctedContinuous: pastRuns.members.map((m) => corrected[m]),
      issueIndex: pastRuns.issueIndex,
      runLeads: pastRuns.nLeads,
      raw: pastRuns.raw,
      corrected: pastRuns.corrected,
      nLeads: L,
    });
    pastRuns.issueIndex.forEach((t, u) => {
      if (times[t] < validation.fromMs || times[t] >= validation.toMs) return;
      if (t + L < inPeriod[cut1]) pastA.push(u);
      else if (t >= inPeriod[cut1] && t + L < inPeriod[cut2]) pastB.push(u);
      else if (t >= inPeriod[cut2]) pastC.push(u);
    });
  }

  // Candidates.
  const errSeries = members.map((m) => Float64Array.from({ length: times.length }, (_, t) => transformedError(transform, observed[t], corrected[m][t])));
  const ar1 = fitAr1(errSeries, A[0], A[A.length - 1] + 1);
  const phiAr1 = ar1Multipliers(ar1, L);
  const phiLs = past ? fitPhiPerLead(cube, idxA, { cube: past, issues: pastA }) : fitPhiPerLead(cube, idxA);
  const pastNone = past && pastC.length ? scoreShifts(past, transform, pastC, null) : null;
  const none = scoreShifts(cube, transform, idxC, null);
  type Scored = CandidateScore & { perCase: Float64Array; pastPerCase?: Float64Array };
  const pastPart = (s: ReturnType<typeof scoreShifts>) => ({ pastRuns: { issues: pastC.length, meanCrps: meanOf(s.byLead), byLead: s.byLead }, pastPerCase: s.crps });
  const candidates: Scored[] = [{ name: 'none', servable: true, meanCrps: meanOf(none.byLead), byLead: none.byLead, perCase: none.crps, ...(pastNone ? pastPart(pastNone) : {}) }];
  const add = (name: CandidateScore['name'], servable: boolean, predict: ShiftPredictor, phi?: number[]) => {
    const s = scoreShifts(cube, transform, idxC, predict(cube, idxC));
    const onPast = past && pastC.length && phi ? scoreShifts(past, transform, pastC, multiplierPredictor(phi)(past, pastC)) : null;
    candidates.push({ name, servable, meanCrps: meanOf(s.byLead), byLead: s.byLead, perCase: s.crps, ...(phi ? { phi } : {}), ...(onPast ? pastPart(onPast) : {}) });
  };
  add('ar1', true, multiplierPredictor(phiAr1), phiAr1);
  add('phi-per-lead', true, multiplierPredictor(phiLs), phiLs);
  if (o.trees && idxB.length > 0) {
    add('trees-lead-feature', false, treePredictor(cube, transform, idxA, idxB, [[1, L]], o, shouldStop));
    add('trees-lead-bands', false, treePredictor(cube, transform, idxA, idxB, o.leadBands ?? defaultLeadBands(L), o, shouldStop));
  }
  const ranked = [...candidates].filter((c) => c.meanCrps !== null).sort((a, b) => a.meanCrps! - b.meanCrps!);
  const best = ranked[0]?.name ?? 'none';
  const servedCandidate = ranked.find((c) => c.servable && c.name !== 'none') ?? null;
  // auto: the pseudo-forecasts of block C must show a gain beyond twice its standard error, and
  // where block C holds enough past runs they must not show a loss beyond twice theirs (they carry
  // the forecast-forcing error; there are usually too few of them to show a gain on their own).
  const gains = servedCandidate ? pairedLeadDifference(candidates[0].perCase, servedCandidate.perCase, idxC.length, L) : [];
  const checkedOnPastRuns = pastC.length >= MIN_PAST_RUNS_TO_CHECK && !!servedCandidate?.pastPerCase;
  const pastGains = checkedOnPastRuns ? pairedLeadDifference(candidates[0].pastPerCase!, servedCandidate!.pastPerCase!, pastC.length, L) : null;
  const leads = gains.map((g, k) => {
    const p = pastGains?.[k];
    const pastHarm = !!p && p.mean !== null && p.se !== null && p.mean < -2 * p.se;
    return {
      lead: k + 1,
      crpsGain: g.mean,
      se: g.se,
      ...(p ? { pastRunGain: p.mean, pastRunSe: p.se } : {}),
      on: o.mode === 'on' || (g.mean !== null && g.se !== null && g.mean > 2 * g.se && !pastHarm),
    };
  });
  const blocks = { fit: block(idxA), earlyStopping: block(idxB), heldOut: block(idxC) };
  const publicCandidates = candidates.map(({ perCase: _p, pastPerCase: _q, ...c }) => c);
  const sources = {
    pseudoForecasts: { fit: idxA.length, earlyStopping: idxB.length, heldOut: idxC.length },
    pastRuns: { fit: pastA.length, earlyStopping: pastB.length, heldOut: pastC.length },
  };
  const result = { mode: o.mode, blocks, members: members.length, candidates: publicCandidates, best, leads, checkedOnPastRuns, sources, note: PSEUDO_FORECAST_NOTE };
  if (!servedCandidate) return { ...result, model: null, served: null, reason: 'no updating candidate could be scored', archive: null };
  if (!leads.some((l) => l.on)) {
    return { ...result, model: null, served: null, reason: 'updating: auto found no lead time where the held-out block shows a gain beyond twice its standard error', archive: null };
  }
  const phi = servedCandidate.phi!.map((p, k) => (leads[k].on ? p : 0));
  const model: UpdatingModel = { method: servedCandidate.name as UpdatingModel['method'], transform, phi, ar1 };
  // The archive spans the residual fit's archive block (held out from its early stopping), as the
  // lead-free one does: φ has one number per lead, fitted on tens of thousands of pairs, so its
  // in-sample fit on the part of block A inside it is negligible.
  // At most ~1 million archived cases (an hourly gauge's 240 leads would give several million):
  // every n-th issue is kept, evenly over the period.
  const inArchive = (t: number) => times[t] >= archivePeriod.fromMs && times[t] < archivePeriod.toMs;
  const allIssues = [...idxA, ...idxB, ...idxC].filter((i) => inArchive(issueIndex[i]));
  const archiveStride = Math.max(1, Math.ceil((allIssues.length * archiveMembers(cube.nMembers).length * L) / MAX_ARCHIVE_CASES));
  const parts = [{ cube, issues: allIssues.filter((_, j) => j % archiveStride === 0) }];
  if (past) parts.push({ cube: past, issues: [...pastA, ...pastB, ...pastC].filter((u) => inArchive(past!.issueIndex[u])) });
  const archive = updatedArchive(parts, transform, phi, times, series.stepSeconds, forcingErrorVariance);
  return { ...result, model, served: servedCandidate.name, reason: null, archive };
}

function spreadIndices(n: number, k: number): number[] {
  if (k >= n) return Array.from({ length: n }, (_, i) => i);
  return Array.from({ length: k }, (_, i) => Math.round((i * (n - 1)) / Math.max(1, k - 1)));
}

/** Each lead's factor √(1 + τ_h²/V_h), V_h the variance of its errors (τ² past its length: its last value). */
function errorGrowth(errors: Float64Array, rows: number, L: number, tau2: ArrayLike<number>): Float64Array {
  const g = new Float64Array(L).fill(1);
  for (let k = 0; k < L; k++) {
    let s = 0;
    let ss = 0;
    let n = 0;
    for (let r = 0; r < rows; r++) {
      const e = errors[r * L + k];
      if (Number.isNaN(e)) continue;
      s += e;
      ss += e * e;
      n++;
    }
    const v = n > 1 ? (ss - (s * s) / n) / (n - 1) : 0;
    const t = tau2[Math.min(k, tau2.length - 1)];
    if (v > 0 && t > 0) g[k] = Math.sqrt(1 + t / v);
  }
  return g;
}

/**
 * The per-lead archive of the updated members' errors, and the issue-time error of each archived
 * case in the archive's case order. The archive builder groups cases by lead and sorts each
 * group by predictor (ties by input order); the same order is rebuilt here so issueError[i]
 * belongs to case i, and checked against the archive's predictors.
 */
export function updatedArchive(
  parts: { cube: PseudoForecastCube; issues: number[] }[],
  transform: ErrorTransform,
  phi: number[],
  times: ArrayLike<number>,
  stepSeconds: number,
  forcingErrorVariance: ArrayLike<number> | null = null,
): { archive: ErrorArchive; issueError: Float64Array; summary: Record<string, unknown> } {
  const L = parts[0].cube.nLeads;
  let rows = 0;
  for (const p of parts) rows += p.issues.length * archiveMembers(p.cube.nMembers).length;
  const updated = new Float64Array(rows * L).fill(NaN);
  const observed = new Float64Array(rows * L).fill(NaN);
  const dayOfYear = new Uint16Array(rows * L).fill(1);
  const rowError = new Float64Array(rows).fill(NaN);
  const stepMs = stepSeconds * 1000;
  let row = 0;
  for (const { cube, issues } of parts) {
    const M0 = cube.nMembers;
    const keep = archiveMembers(M0);
    for (const i of issues) {
      const t0 = times[cube.issueIndex[i]];
      for (const m of keep) {
        const e0 = cube.issueError[i * M0 + m];
        rowError[row] = e0;
        for (let k = 0; k < L; k++) {
          const c = cube.corrected[(i * M0 + m) * L + k];
          dayOfYear[row * L + k] = dayOfYearUtc(t0 + (k + 1) * stepMs);
          if (!Number.isFinite(e0) || !Number.isFinite(c)) continue;
          updated[row * L + k] = shiftInTransform(transform, c, phi[k] * e0);
          observed[row * L + k] = cube.observed[i * L + k];
        }
        row++;
      }
    }
  }
  // Errors in the transform; each issue row keeps its issue-time error, so the archive splits every
  // lead into strata of it (src/core/stochastic/error-archive.ts) and a run draws from its own stratum.
  const errorMatrix = new Float64Array(rows * L).fill(NaN);
  for (let i = 0; i < rows * L; i++) errorMatrix[i] = transformedError(transform, observed[i], updated[i]);
  // Pseudo-forecast errors lack the forecast-forcing error. Where past runs measured its variance
  // τ_h², the stage widens each lead's drawn errors by g_h = √(1 + τ_h²/V_h), V_h their own variance,
  // about their neighbours' mean (the archive's leadScale; src/core/stochastic/lead-growth.ts), so
  // their variance becomes about V_h + τ_h² and the centre stays. (The few past-run cases, which
  // carry that error already, are widened too.)
  const growth = forcingErrorVariance && forcingErrorVariance.length ? errorGrowth(errorMatrix, rows, L, forcingErrorVariance) : null;
  // (a copy: the builder fills template gaps in the matrix it is given)
  const archive = archiveFromErrorMatrix({ nIssues: rows, nLeads: L, predictor: updated, error: errorMatrix.slice(), dayOfYear, transform, issueError: rowError });
  if (growth) archive.leadScale = growth;
  // Rebuild the case order: input order is row-major (row, lead) over finite cases, grouped by
  // lead × stratum and sorted by predictor within a group (ties by input order).
  const S = archiveStrata(archive);
  const group: number[] = [];
  const pred: number[] = [];
  const err: number[] = [];
  for (let r = 0; r < rows; r++) {
    const ie = rowError[r];
    const stratum = Number.isNaN(ie) ? S >> 1 : stratumOf(archive.issueErrorEdges, ie);
    for (let k = 0; k < L; k++) {
      if (Number.isNaN(errorMatrix[r * L + k])) continue;
      group.push(k * S + stratum);
      pred.push(updated[r * L + k]);
      err.push(ie);
    }
  }
  const order = group.map((_, i) => i).sort((a, b) => group[a] - group[b] || pred[a] - pred[b] || a - b);
  const issueError = Float64Array.from(order, (i) => err[i]);
  for (let i = 0; i < order.length; i++) {
    if (archive.predictor[i] !== pred[order[i]]) throw new Error('internal: issue errors out of step with the archive cases');
  }
  const summary = {
    nLeads: L,
    issues: parts.reduce((a, p) => a + p.issues.length, 0),
    pseudoForecastIssues: parts[0].issues.length,
    pastRunIssues: parts[1]?.issues.length ?? 0,
    members: archiveMembers(parts[0].cube.nMembers).length,
    cases: archive.predictor.length,
    templates: archive.templateStart.length,
    templateLength: archive.templateLength,
    transform: archive.transform,
    source: 'pseudo-forecasts (continuous simulations after the residual model and the updater), and real past runs where stored',
    issueErrorStrata: S,
    leadGrowth: growth ? Array.from(growth) : null,
  };
  return { archive, issueError, summary };
}
