// The hindcast's CPU work, run inside a compute worker thread (src/workers/compute-worker.ts, task kind
// 'hindcast'): the whole correction pipeline over many past issues — feature rows → the version's
// ONNX residual model(s) → stochastic stage with the version's error archive — then the
// side-by-side verification of raw, corrected and stochastic, the ensemble-size study and the
// stochastic-stage advice.
import type { InferenceSession } from 'onnxruntime-node';
import { archiveFromBytes } from '../core/stochastic/archive-codec.ts';
import { dayOfYearUtc } from '../core/day-of-year.ts';
import { FeatureInputError, type RunInput } from '../core/features/features.ts';
import { checkResidualSpec, continuousInputs, inputWidth, isSequenceSpec, requiredRunInputs, rowShape, servingInputs, specForcings, type ResidualSpec } from '../core/features/model-inputs.ts';
import { CancelledError } from '../core/cancelled.ts';
import { correctedMember } from '../core/correction/corrected-member.ts';
import { createStochasticWorkspace, DEFAULT_QUANTILE_PROBS, type StochasticResult } from '../core/stochastic/stochastic-stage.ts';
import {
  adviseStochasticStage,
  createComparison,
  createWarningVerification,
  driftReferenceFrom,
  HindcastWarningCollector,
  runHindcast,
  warningReferences,
  type ComparisonReport,
  type DriftReference,
  type SourceName,
  type StochasticAdvice,
  type WarningReport,
} from '../core/verification/index.ts';
import { createResidualSession, predictResiduals } from './onnx-session.ts';
import type { ArchiveSeries } from '../core/archive-types.ts';
import { applyUpdating, checkUpdatingModel } from '../core/correction/updating.ts';
import { updatingPassScores, type UpdatingByLead, type UpdatingPassCollector } from '../core/correction/updating-verification.ts';

export interface HindcastSettings {
  mode: 'simulation' | 'reforecast';
  /** Lead times per issue (steps). */
  horizon: number;
  /** Seed of issue 0's stochastic stage (issue i uses seed + i) and of the verification draws. */
  seed: number;
  nDraws: number;
  seasonalWindowDays: number | null;
  /** Gauge thresholds (m³/s) for Brier scores. */
  thresholds: number[];
  /** Lead indices (0 = first lead) kept by the verification; null = all. */
  leadRange: { min?: number; max?: number } | null;
  sizeStudy: {
    sources: SourceName[];
    /** Candidate sizes; each source keeps those up to its count; the member count is added. */
    sizes: number[];
    repeats: number;
    /** Share of cases studied; null = enough for about `targetCases` cases. */
    caseFraction: number | null;
    targetCases: number;
  };
  /** Warning verification (src/core/verification/warning-verification.ts); null = none. */
  warnings?: {
    thresholds: { label: string; value: number }[];
    attentionLevel: number;
    /** Observations before the period (ascending): seasonal climatology, and rates when no fitting period. */
    observations: { times: Float64Array; values: Float64Array };
    /** The model's fitting period (climatological rates of the Brier skill). */
    fitting: { fromMs: number; toMs: number } | null;
  } | null;
}

export interface HindcastTaskInput {
  /** The gauge's archive around the period: warm-up before the first issue to the last valid time. */
  series: ArchiveSeries;
  /** Index into series.times of each issue time. */
  issueIndex: Int32Array;
  /**
   * Reforecast mode: the stored past runs, values [(issue·nMembers + member)·horizon + lead], NaN
   * where missing; members in series.members order. null in simulation mode.
   */
  reforecast: { values: Float64Array } | null;
  model: { spec: unknown; parts: Uint8Array[] };
  /** The version's corrected-member error archive (archive-codec bytes). */
  archive: Uint8Array;
  settings: HindcastSettings;
  /**
   * The version's issue-time updater and its per-lead archive of updated-member errors: the
   * hindcast then also runs with updating (on the observation at each issue time) and reports
   * raw, corrected, updated and both stochastic stages per lead.
   */
  updating?: { model: unknown; archive: Uint8Array } | null;
}

export interface HindcastOutput {
  issues: {
    given: number;
    used: number;
    /** Issues left out: a raw value missing (simulation gap, incomplete reforecast) or a feature input missing. */
    skippedMissingForecast: number;
    skippedMissingInputs: number;
    /** Index into series.times of each issue used. */
    usedIndex: Int32Array;
  };
  /** Verification cases handed to the comparison, and leads without observation. */
  cases: number;
  unobserved: number;
  members: string[];
  models: number;
  /** How the corrected members were computed: once per member and valid time, or per issue. */
  correction: 'per-valid-time' | 'per-issue';
  report: ComparisonReport;
  advice: StochasticAdvice;
  /** The warnings, with where their references came from. */
  warnings: (WarningReport & { references: { climatology: string; rates: string | null } }) | null;
  driftReference: DriftReference | null;
  /** Per lead: without and with issue-time updating (absent without an updater). */
  updating?: UpdatingByLead | null;
  /**
   * Each used issue's output, as served: per lead (observed, raw mean, corrected mean, the stage's
   * quantiles at `probs`, P(flow > threshold) per threshold), then per threshold P(exceeded at any
   * lead); [issue·(H·fieldsPerLead + T) + …], NaN where missing.
   */
  perIssue: { probs: number[]; fieldsPerLead: number; values: Float64Array };
  timings: { correctionMs: number; stageMs: number; verificationMs: number; reportMs: number; totalMs: number };
}

export type Progress = (p: { stage: string; percent: number }) => void;

const ROWS_PER_BATCH = 100_000;

/** Quantile levels kept for each issue of a hindcast: the ones a served run gives by default. */
const PER_ISSUE_PROBS = DEFAULT_QUANTILE_PROBS;

/** Gathers each issue's output as the per-issue table (see HindcastOutput.perIssue). */
function perIssueCollector(I: number, M: number, K: number, H: number, T: number, observedAt: (s: number, h: number) => number) {
  const nQ = PER_ISSUE_PROBS.length;
  const fieldsPerLead = 3 + nQ + T;
  const perIssue = H * fieldsPerLead + T;
  const values = new Float64Array(I * perIssue).fill(NaN);
  return {
    fieldsPerLead,
    values,
    add(s: number, raw: Float64Array, corrected: Float64Array, stage: StochasticResult | null) {
      const base = s * perIssue;
      for (let h = 0; h < H; h++) {
        const o = base + h * fieldsPerLead;
        let r = 0;
        for (let m = 0; m < M; m++) r += raw[m * H + h];
        let c = 0;
        for (let km = 0; km < K * M; km++) c += corrected[km * H + h];
        values[o] = observedAt(s, h);
        values[o + 1] = r / M;
        values[o + 2] = c / (K * M);
        if (stage) {
          for (let q = 0; q < nQ; q++) values[o + 3 + q] = stage.quantiles[h * nQ + q];
          for (let t = 0; t < T; t++) values[o + 3 + nQ + t] = stage.exceedance[t * H + h];
        }
      }
      if (stage) for (let t = 0; t < T; t++) values[base + H * fieldsPerLead + t] = stage.exceedanceAnyTime[t];
    },
  };
}

/**
 * Runs the hindcast. Simulation mode: issue i's pseudo-forecast of member m is the member's
 * continuous simulation at i + 1 … i + H, with the simulation before i as warm-up; reforecast
 * mode: the stored run per lead, warm-up from the continuous simulation up to issue time. Both use
 * the archived (observed) forcings for the feature rows: reforecast forcings are not stored.
 * When the feature spec reads neither the lead time nor the issue-time error, a lead's feature row
 * in simulation mode depends only on the member and the valid time, so each (member, valid time)
 * is corrected once instead of once per issue (the rows are identical; it saves a factor H).
 */
export async function computeHindcast(input: HindcastTaskInput, progress: Progress, shouldStop: () => boolean): Promise<HindcastOutput> {
  const t0 = performance.now();
  const { series, settings } = input;
  const H = settings.horizon;
  const M = series.members.length;
  const n = series.times.length;
  const stepMs = series.stepSeconds * 1000;
  const spec = checkResidualSpec(input.model.spec);
  if (spec.stepSeconds !== series.stepSeconds) throw new Error(`the model's step (${spec.stepSeconds} s) differs from the gauge's (${series.stepSeconds} s)`);
  for (const name of specForcings(spec)) {
    if (!(name in series.forcings)) throw new Error(`the model needs forcing ${name}, which the gauge's archive does not hold`);
  }
  if (M === 0) throw new Error('no members to hindcast');
  const archive = archiveFromBytes(input.archive);
  const reach = archive.nLeads > 0 ? Math.min(archive.nLeads, archive.templateLength) : archive.templateLength;
  if (reach < H) throw new Error(`the error archive covers ${reach} lead times; the hindcast asks for ${H}`);
  const need = requiredRunInputs(spec);
  let warm = need.simStepsToIssue;
  for (const f of need.forcings) warm = Math.max(warm, f.stepsToIssue);
  const check = () => {
    if (shouldStop()) throw new CancelledError();
  };

  // Raw values per issue; issues with any missing raw value are left out.
  const given = input.issueIndex.length;
  const keep: number[] = [];
  const keepSource: number[] = [];
  let skippedForecast = 0;
  let skippedInputs = 0;
  for (let s = 0; s < given; s++) {
    const i = input.issueIndex[s];
    if (i - warm < 0 || i + H >= n) {
      skippedInputs++;
      continue;
    }
    let ok = true;
    for (let m = 0; m < M && ok; m++) {
      for (let h = 0; h < H; h++) {
        const v = input.reforecast ? input.reforecast.values[(s * M + m) * H + h] : series.members[m].values[i + h + 1];
        if (!Number.isFinite(v)) {
          ok = false;
          break;
        }
      }
    }
    if (ok) {
      keep.push(i);
      keepSource.push(s);
    } else skippedForecast++;
  }

  const sessions: InferenceSession[] = [];
  for (const bytes of input.model.parts) sessions.push(await createResidualSession(bytes));
  const K = sessions.length;
  if (K === 0) throw new Error('the model version has no ONNX parts');
  try {
    progress({ stage: 'correcting the members', percent: 2 });
    const tCorr = performance.now();
    const perValidTime = input.reforecast === null && (isSequenceSpec(spec) || (!spec.leadTime && !spec.issueError));
    // corrected values: per valid time [(k·M + m)·n + t], or per issue [((s·K + k)·M + m)·H + h].
    let byTime: Float64Array | null = null;
    let byIssue: Float64Array | null = null;
    const inputsOk = new Uint8Array(keep.length).fill(1);
    if (perValidTime) byTime = await correctPerValidTime(spec, series, sessions, keep, H, progress, check);
    else byIssue = await correctPerIssue(spec, series, sessions, keep, keepSource, input.reforecast, H, inputsOk, progress, check);
    const correctionMs = performance.now() - tCorr;

    // The issues that go through the stage: all their corrected values present.
    const issues: number[] = [];
    const slots: number[] = [];
    for (let j = 0; j < keep.length; j++) {
      const i = keep[j];
      let ok = inputsOk[j] === 1;
      if (ok && byTime) {
        for (let k = 0; k < K * M && ok; k++) for (let h = 1; h <= H; h++) if (!Number.isFinite(byTime[k * n + i + h])) ok = false;
      }
      if (ok) {
        issues.push(i);
        slots.push(j);
      } else skippedInputs++;
    }
    const I = issues.length;
    if (I === 0) throw new Error('no issue in the period has complete inputs (raw values, forcings and the warm-up)');

    const raw = new Float64Array(I * M * H);
    const observed = new Float64Array(I * H);
    const dayOfYear = new Uint16Array(I * H);
    for (let s = 0; s < I; s++) {
      const i = issues[s];
      const src = keepSource[slots[s]];
      for (let m = 0; m < M; m++) {
        for (let h = 0; h < H; h++) {
          raw[(s * M + m) * H + h] = input.reforecast ? input.reforecast.values[(src * M + m) * H + h] : series.members[m].values[i + h + 1];
        }
      }
      for (let h = 0; h < H; h++) {
        observed[s * H + h] = series.observed[i + h + 1];
        dayOfYear[s * H + h] = dayOfYearUtc(series.times[i] + (h + 1) * stepMs);
      }
    }
    const correct = byTime
      ? (_raw: Float64Array, s: number, out: Float64Array) => {
          const i = issues[s];
          for (let k = 0; k < K * M; k++) for (let h = 0; h < H; h++) out[k * H + h] = byTime![k * n + i + h + 1];
        }
      : (_raw: Float64Array, s: number, out: Float64Array) => {
          out.set(byIssue!.subarray(slots[s] * K * M * H, (slots[s] + 1) * K * M * H));
        };

    const study = settings.sizeStudy;
    const caseFraction = study.caseFraction ?? Math.min(1, study.targetCases / Math.max(1, I * H));
    // The members' count is added so the stage can be read at the ensemble's size; the stage's full
    // draw count is not (all of it is the comparison's own stochastic column, and re-drawing all
    // values in random order would only repeat it at great cost).
    const sizes = [...new Set([...study.sizes, M])].sort((a, b) => a - b);
    const comparison = createComparison({
      seed: settings.seed,
      thresholds: settings.thresholds,
      leadRange: settings.leadRange,
      includeStochastic: true,
      sizeStudy: study.sources.length ? { sources: study.sources, sizes, repeats: study.repeats, caseFraction, seed: settings.seed } : null,
    });
    // Warnings: the cases gathered back into one run per issue (trajectories kept as paths).
    const ws = settings.warnings ?? null;
    let warnings: ReturnType<typeof createWarningVerification> | null = null;
    let collector: HindcastWarningCollector | null = null;
    let refsText = { climatology: 'none', rates: null as string | null };
    if (ws) {
      // Observations before the period plus those the series holds up to the first issue: all known then.
      const firstIssue = series.times[issues[0]];
      const refs = warningReferences(ws.observations.times, ws.observations.values, {
        cutoffMs: firstIssue,
        fitting: ws.fitting,
        thresholds: ws.thresholds.map((t) => t.value),
        horizon: H,
        stepMs,
      });
      refsText = {
        climatology: refs.climatology ? `observations within ±15 days of the valid time's day of the year, ${refs.climatology.size} before the first issue` : 'none (no observations before the period)',
        rates: refs.ratesFrom,
      };
      warnings = createWarningVerification({
        sources: ['raw', 'corrected', 'stochastic'],
        thresholds: ws.thresholds,
        attentionLevel: ws.attentionLevel,
        climatology: refs.climatology,
        climatologicalRates: refs.climatologicalRates,
        leadRange: settings.leadRange,
        stepMs,
        seed: settings.seed,
      });
      const w = warnings;
      collector = new HindcastWarningCollector(
        H,
        (s) => {
          const i = issues[s];
          return { issueMs: series.times[i], validMs: Float64Array.from({ length: H }, (_, h) => series.times[i] + (h + 1) * stepMs), persistence: series.observed[i] };
        },
        (run) => w.addRun(run),
      );
    }
    progress({ stage: 'stochastic stage and verification', percent: 35 });
    let verificationMs = 0;
    let lastIssue = -1;
    // With an issue-time updater the comparison follows serving: each issue is updated on the
    // observation at its issue time and the stage draws from the updated members' archive. A
    // second pass without updating gives the per-lead comparison of the two.
    const upd = input.updating ? { model: checkUpdatingModel(input.updating.model), archive: archiveFromBytes(input.updating.archive) } : null;
    const atIssue = upd ? await correctPerValidTime(spec, series, sessions, issues.map((i) => i - 1), 1, () => {}, check) : null;
    const atObs = new Float64Array(K * M);
    let notUpdated = 0;
    let lastIssueError: Float64Array | undefined;
    const correctUpdated = (r: Float64Array, s: number, out: Float64Array) => {
      correct(r, s, out);
      const i = issues[s];
      const y = series.observed[i];
      let ok = Number.isFinite(y);
      for (let km = 0; km < K * M && ok; km++) {
        atObs[km] = atIssue![km * n + i];
        if (!Number.isFinite(atObs[km])) ok = false;
      }
      lastIssueError = ok ? applyUpdating(upd!.model, out, atObs, y, 0, H) : undefined;
      if (!ok) notUpdated++;
    };
    const withUpdating: UpdatingPassCollector | null = upd ? updatingPassScores(I, H) : null;
    const perIssue = perIssueCollector(I, M, K, H, settings.thresholds.length, (s, h) => observed[s * H + h]);
    const tStage = performance.now();
    const summary = runHindcast(
      {
        nIssues: I,
        nMembers: M,
        nLeads: H,
        nModels: K,
        raw,
        observed,
        dayOfYear,
        correct: upd ? correctUpdated : correct,
        ...(upd ? { issueError: () => lastIssueError } : {}),
        archive: upd ? upd.archive : archive,
        stochastic: { seed: settings.seed, nDraws: settings.nDraws, seasonalWindowDays: settings.seasonalWindowDays, probs: PER_ISSUE_PROBS, thresholds: settings.thresholds },
        onIssue: (s, o) => perIssue.add(s, o.raw, o.corrected, o.stage),
      },
      (c, issue) => {
        if (issue !== lastIssue) {
          lastIssue = issue;
          if ((issue & 63) === 0) {
            check();
            progress({ stage: 'stochastic stage and verification', percent: 35 + ((upd ? 40 : 60) * issue) / I });
          }
        }
        const a = performance.now();
        comparison.add(c);
        collector?.add(c, issue);
        withUpdating?.add(c, issue);
        verificationMs += performance.now() - a;
      },
      createStochasticWorkspace(),
    );
    const stageMs = performance.now() - tStage - verificationMs;
    let updating: UpdatingByLead | null = null;
    if (upd && withUpdating) {
      progress({ stage: 'the same issues without issue-time updating', percent: 75 });
      const withoutUpdating = updatingPassScores(I, H);
      runHindcast(
        {
          nIssues: I,
          nMembers: M,
          nLeads: H,
          nModels: K,
          raw,
          observed,
          dayOfYear,
          correct,
          archive,
          stochastic: { seed: settings.seed, nDraws: settings.nDraws, seasonalWindowDays: settings.seasonalWindowDays },
        },
        (c, issue) => {
          if ((issue & 63) === 0) check();
          withoutUpdating.add(c, issue);
        },
        createStochasticWorkspace(),
      );
      updating = withoutUpdating.compare(withUpdating, { method: upd.model.method, issuesWithoutObservation: notUpdated });
    }
    check();
    progress({ stage: 'scores and advice', percent: 96 });
    const tReport = performance.now();
    collector?.finish();
    const report = comparison.result();
    const advice = adviseStochasticStage(report);
    const warningReport = warnings ? { ...warnings.result(), references: refsText } : null;
    let driftReference: DriftReference | null = null;
    try {
      driftReference = report.stochastic && report.stochastic.n >= 30 ? driftReferenceFrom(report, 'stochastic') : null;
    } catch {
      driftReference = null;
    }
    const reportMs = performance.now() - tReport;
    return {
      issues: {
        given,
        used: I,
        skippedMissingForecast: skippedForecast,
        skippedMissingInputs: skippedInputs,
        usedIndex: Int32Array.from(issues),
      },
      cases: summary.cases,
      unobserved: summary.unobserved,
      members: series.members.map((m) => m.id),
      models: K,
      correction: byTime ? 'per-valid-time' : 'per-issue',
      report,
      advice,
      warnings: warningReport,
      driftReference,
      updating,
      perIssue: { probs: [...PER_ISSUE_PROBS], fieldsPerLead: perIssue.fieldsPerLead, values: perIssue.values },
      timings: { correctionMs, stageMs, verificationMs, reportMs, totalMs: performance.now() - t0 },
    };
  } finally {
    await Promise.all(sessions.map((s) => s.release()));
  }
}

/** The corrected member, or NaN (missing: the issue is left out) when the sum is not finite. */
const usableCorrected = (value: number, residual: number) => (Number.isFinite(value + residual) ? correctedMember(value, residual) : NaN);

/**
 * Simulation mode with lead-free features: every (model, member, valid time) the issues need is
 * corrected once from the continuous rows (the same row builder serving uses).
 */
async function correctPerValidTime(
  spec: ResidualSpec,
  series: ArchiveSeries,
  sessions: InferenceSession[],
  issues: number[],
  H: number,
  progress: Progress,
  check: () => void,
): Promise<Float64Array> {
  const n = series.times.length;
  const M = series.members.length;
  const K = sessions.length;
  const out = new Float64Array(K * M * n).fill(NaN);
  if (!issues.length) return out;
  const need = new Uint8Array(n);
  for (const i of issues) for (let h = 1; h <= H; h++) need[i + h] = 1;
  for (let m = 0; m < M; m++) {
    check();
    const sim = series.members[m].values;
    const all = continuousInputs(spec, { times: series.times, sim, forcings: series.forcings, obs: sim });
    const nF = all.nFeatures;
    const pick: number[] = [];
    for (let r = 0; r < all.nRows; r++) if (need[all.index[r]]) pick.push(r);
    const x = new Float32Array(pick.length * nF);
    for (let j = 0; j < pick.length; j++) x.set(all.rows.subarray(pick[j] * nF, (pick[j] + 1) * nF), j * nF);
    for (let k = 0; k < K; k++) {
      const residual = pick.length ? await predictResiduals(sessions[k], x, pick.length, nF, rowShape(spec)) : new Float32Array(0);
      const base = (k * M + m) * n;
      for (let j = 0; j < pick.length; j++) {
        const t = all.index[pick[j]];
        out[base + t] = usableCorrected(sim[t], residual[j]);
      }
    }
    progress({ stage: 'correcting the members', percent: 2 + (33 * (m + 1)) / M });
  }
  return out;
}

/**
 * Per issue (reforecast mode, or features that read the lead time or the issue-time error):
 * serving rows for each issue's members × lead times, batched over issues for inference.
 */
async function correctPerIssue(
  spec: ResidualSpec,
  series: ArchiveSeries,
  sessions: InferenceSession[],
  issues: number[],
  issueSource: number[],
  reforecast: { values: Float64Array } | null,
  H: number,
  inputsOk: Uint8Array,
  progress: Progress,
  check: () => void,
): Promise<Float64Array> {
  const M = series.members.length;
  const K = sessions.length;
  const nF = inputWidth(spec);
  const need = requiredRunInputs(spec);
  const W = need.simStepsToIssue;
  const out = new Float64Array(issues.length * K * M * H).fill(NaN);
  const perIssue = M * H;
  const batchIssues = Math.max(1, Math.floor(ROWS_PER_BATCH / perIssue));
  const rows = new Float32Array(batchIssues * perIssue * nF);
  const rawBatch = new Float64Array(batchIssues * perIssue);
  const memberBuf = Array.from({ length: M }, () => new Float64Array(W + 1 + H));
  const forcingNames = specForcings(spec);
  const forcings = forcingNames.map((name) => series.forcings[name]);
  for (let b0 = 0; b0 < issues.length; b0 += batchIssues) {
    check();
    const b1 = Math.min(issues.length, b0 + batchIssues);
    const filled: number[] = [];
    for (let j = b0; j < b1; j++) {
      const i = issues[j];
      const slot = filled.length;
      const members = memberBuf.map((buf, m) => {
        const sim = series.members[m].values;
        for (let w = 0; w <= W; w++) buf[w] = sim[i - W + w];
        for (let h = 0; h < H; h++) buf[W + 1 + h] = reforecast ? reforecast.values[(issueSource[j] * M + m) * H + h] : sim[i + h + 1];
        for (let h = 0; h < H; h++) rawBatch[slot * perIssue + m * H + h] = buf[W + 1 + h];
        return buf;
      });
      const run: RunInput = {
        issueTime: series.times[i],
        nLeads: H,
        members,
        forcings: Object.fromEntries(forcingNames.map((name, fi) => [name, forcings[fi].subarray(i - need.forcings[fi].stepsToIssue, i + H + 1)])),
        issueObservation: series.observed[i],
      };
      try {
        servingInputs(spec, run, rows.subarray(slot * perIssue * nF));
        filled.push(j);
      } catch (err) {
        if (!(err instanceof FeatureInputError)) throw err;
        inputsOk[j] = 0;
      }
    }
    const nRows = filled.length * perIssue;
    for (let k = 0; k < K && nRows > 0; k++) {
      const residual = await predictResiduals(sessions[k], rows, nRows, nF, rowShape(spec));
      for (let slot = 0; slot < filled.length; slot++) {
        const j = filled[slot];
        const base = (j * K + k) * perIssue;
        for (let r = 0; r < perIssue; r++) out[base + r] = usableCorrected(rawBatch[slot * perIssue + r], residual[slot * perIssue + r]);
      }
    }
    progress({ stage: 'correcting the members', percent: 2 + (33 * b1) / issues.length });
  }
  return out;
}
