import { updatingSplit, type UpdatingSplit } from '../correction/updating-split.ts';
import { createComparison, type ComparisonReport } from './compare-forecasts.ts';
import { midpointProbs } from './case.ts';
import { persistenceValue } from './reference-forecasts.ts';
import { leadValues, unpackRecord, type LeadColumns, type PackedRecords, type RunRecord } from './run-record.ts';
import { warningReferences } from './warning-references.ts';
import { createWarningVerification, type WarningReport, type WarningRun, type WarningSourceRun, type WarningVerification } from './warning-verification.ts';

/**
 * The verification of stored runs from their records (run-record.ts) and the gauge's
 * observations: raw, corrected and stochastic side by side (createComparison), the runs served
 * with and without issue-time updating apart, and the warnings (createWarningVerification, with
 * the seasonal climatology of the observations before the first verified issue, persistence and
 * the fitting period's rates). Pure: the caller reads the store; it may run in a worker thread.
 * Every score that reads an observation is computed here from the observations given, so the
 * answer follows every revision of them.
 */
export interface StoredRunMeta {
  id: string;
  issueMs: number;
  source: string;
  status: 'corrected' | 'degraded';
  modelVersionId: string | null;
}

export interface StoredVerificationInput {
  thresholds: { label: string; value: number }[];
  stepMs: number;
  attentionLevel: number;
  /** Issue-time window start, when the request gives one (the climatology stops there). */
  fromMs?: number;
  /** Lead times kept, in steps (1 = first lead), inclusive. */
  minLead?: number;
  maxLead?: number;
  /** The active version's fitting period (the warnings' Brier-skill reference), or null. */
  fitting: { fromMs: number; toMs: number } | null;
  /** Every observation of the gauge, times ascending; NaN = missing. */
  observations: { times: Float64Array; values: Float64Array };
  /** In issue-time order (then id), aligned with the records. */
  runs: StoredRunMeta[];
  records: PackedRecords;
  replicates?: number;
}

export interface StoredVerificationResult {
  comparison: ComparisonReport;
  byUpdating: UpdatingSplit | null;
  runs: { total: number; verified: number; corrected: number; degraded: number; sources: Record<string, number>; modelVersions: { id: string | null; runs: number }[] };
  degradedCases: number;
  warnings: { report: WarningReport | null; references: { climatology: string; rates: string | null }; skipped: { degraded: number; thresholdsChanged: number } };
  /** Milliseconds of each part (scores: the cases; then the two aggregations). */
  ms: Record<string, number>;
}

const WINDOW_DAYS = 15;
const NONE = new Float64Array(0);

export function verifyStoredRecords(input: StoredVerificationInput): StoredVerificationResult {
  const ms: Record<string, number> = {};
  let last = performance.now();
  const lap = (stage: string) => {
    const now = performance.now();
    ms[stage] = (ms[stage] ?? 0) + now - last;
    last = now;
  };
  const { minLead, maxLead, stepMs } = input;
  const leadRange = minLead !== undefined || maxLead !== undefined ? { min: minLead !== undefined ? minLead - 1 : undefined, max: maxLead !== undefined ? maxLead - 1 : undefined } : null;
  const comparison = createComparison({ seed: 1, thresholds: input.thresholds.map((t) => t.value), leadRange, includeStochastic: true });
  const minK = (minLead ?? 1) - 1;
  const maxK = (maxLead ?? Infinity) - 1;
  const { times, values } = input.observations;
  const byTime = new Map<number, number>();
  for (let i = 0; i < times.length; i++) if (!Number.isNaN(values[i])) byTime.set(times[i], values[i]);
  const runs = { total: 0, verified: 0, corrected: 0, degraded: 0, sources: {} as Record<string, number>, modelVersions: new Map<string | null, number>() };
  const split = updatingSplit();
  let anyUpdated = false;
  let degradedCases = 0;
  const grids = new Map<number, Float64Array>();
  const warnings = storedWarnings(input, byTime, leadRange);

  input.runs.forEach((meta, i) => {
    const r = unpackRecord(input.records, i);
    runs.total++;
    runs[meta.status]++;
    runs.sources[meta.source] = (runs.sources[meta.source] ?? 0) + 1;
    runs.modelVersions.set(meta.modelVersionId, (runs.modelVersions.get(meta.modelVersionId) ?? 0) + 1);
    const corrected = meta.status === 'corrected' && r.corrected ? r.corrected : null;
    if (corrected) {
      split.addRun(r.updated);
      anyUpdated ||= r.updated;
    }
    let verified = false;
    for (let k = 0; k < r.nLeads; k++) {
      const y = byTime.get(r.validMs[k]);
      if (y === undefined) continue;
      verified = true;
      if (!corrected) {
        if (k >= minK && k <= maxK) degradedCases++;
        continue;
      }
      const cor = leadValues(corrected, k);
      const q = leadValues(r.stochastic, k);
      let probs = grids.get(q.length);
      if (!probs && q.length) grids.set(q.length, (probs = midpointProbs(q.length)));
      comparison.add({ lead: k, observation: y, raw: leadValues(r.raw, k), corrected: cor, stochasticQuantiles: probs ? { probs, values: q } : null });
      if (k >= minK && k <= maxK) split.addCase(r.updated, k, y, cor, q.length ? q : null);
    }
    if (verified) runs.verified++;
    warnings.addRun(meta, r, corrected);
  });
  lap('scores');
  const report = comparison.result();
  lap('comparison-result');
  const w = warnings.result();
  lap('warnings-result');
  return {
    comparison: report,
    byUpdating: anyUpdated ? split.result() : null,
    runs: { ...runs, modelVersions: [...runs.modelVersions].map(([id, n]) => ({ id, runs: n })) },
    degradedCases,
    warnings: w,
    ms,
  };
}

/**
 * The warnings' sink. Degraded runs have no corrected members and are left out, as in the flow
 * comparison; runs issued with other thresholds than the gauge's present ones are left out too.
 * The horizon (the any-time rate's window and the bootstrap block) is taken from the first 50 runs.
 */
function storedWarnings(input: StoredVerificationInput, byTime: Map<number, number>, leadRange: { min?: number; max?: number } | null) {
  const { times, values } = input.observations;
  const stepMs = input.stepMs;
  let core: WarningVerification | null = null;
  let refsText = { climatology: 'none', rates: null as string | null };
  const skipped = { degraded: 0, thresholdsChanged: 0 };
  let horizon = 0;
  const pending: { meta: StoredRunMeta; r: RunRecord }[] = [];

  const begin = () => {
    const cutoffMs = input.fromMs ?? pending[0].meta.issueMs;
    const refs = warningReferences(times, values, {
      cutoffMs,
      fitting: input.fitting,
      thresholds: input.thresholds.map((t) => t.value),
      horizon: Math.max(1, horizon),
      stepMs,
      windowDays: WINDOW_DAYS,
    });
    refsText = {
      climatology: refs.climatology
        ? `observations within ±${WINDOW_DAYS} days of the valid time's day of the year, from ${refs.climatology.size} observations before ${new Date(cutoffMs).toISOString()}`
        : 'none (no observations before the first verified issue)',
      rates: refs.ratesFrom,
    };
    core = createWarningVerification({
      sources: ['raw', 'corrected', 'stochastic'],
      thresholds: input.thresholds,
      attentionLevel: input.attentionLevel,
      climatology: refs.climatology,
      climatologicalRates: refs.climatologicalRates,
      leadRange,
      stepMs,
      replicates: input.replicates,
    });
  };

  const feed = (meta: StoredRunMeta, r: RunRecord) => {
    const H = r.nLeads;
    const run: WarningRun = {
      issueMs: meta.issueMs,
      nLeads: H,
      validMs: r.validMs,
      observed: Float64Array.from(r.validMs, (t) => byTime.get(t) ?? NaN),
      // Persistence: the observation at issue time, or one at most two steps older.
      persistence: persistenceValue(times, values, meta.issueMs, 2 * stepMs),
      sources: [
        { values: NONE, count: 0, trajectories: false, anyTime: r.anyTimeRaw, columns: r.raw },
        { values: NONE, count: 0, trajectories: false, anyTime: r.anyTimeCorrected, columns: r.corrected },
        // The quantiles in their stored order, as issued; with a missing value, laid out as the warning verification filters it.
        r.stochasticFinite
          ? { values: NONE, count: 0, trajectories: false, anyTime: r.anyTimeIssued, columns: r.stochastic, exceedance: r.exceedanceIssued }
          : { ...sortedSource(r.stochastic, H, r.anyTimeIssued), exceedance: r.exceedanceIssued },
      ],
    };
    core!.addRun(run);
  };

  return {
    addRun(meta: StoredRunMeta, r: RunRecord, corrected: LeadColumns | null) {
      if (!corrected) {
        skipped.degraded++;
        return;
      }
      if (!r.issuedMatch) {
        skipped.thresholdsChanged++;
        return;
      }
      if (!core) {
        pending.push({ meta, r });
        horizon = Math.max(horizon, r.nLeads);
        if (pending.length < 50) return;
        begin();
        for (const p of pending.splice(0)) feed(p.meta, p.r);
        return;
      }
      feed(meta, r);
    },
    result(): StoredVerificationResult['warnings'] {
      if (!core && pending.length) {
        begin();
        for (const p of pending.splice(0)) feed(p.meta, p.r);
      }
      return { report: core ? (core as WarningVerification).result() : null, references: refsText, skipped };
    },
  };
}

/**
 * One source laid out as the warning verification reads it ([j·nLeads + k], NaN-padded), with
 * its any-time probabilities given, in stored order (the stage's quantiles ascend by construction).
 */
function sortedSource(c: LeadColumns, H: number, anyTime: Float64Array): WarningSourceRun {
  let K = 0;
  for (let k = 0; k < H; k++) K = Math.max(K, c.start[k + 1] - c.start[k]);
  const out = new Float64Array(K * H).fill(NaN);
  for (let k = 0; k < H; k++) {
    const from = c.start[k];
    const n = c.start[k + 1] - from;
    for (let j = 0; j < n; j++) out[j * H + k] = c.values[from + j];
  }
  return { values: out, count: K, trajectories: false, sortedPerLead: true, anyTime };
}
