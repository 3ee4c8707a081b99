// Use case: verify stored runs. Every stored run's lead times are matched with the observations at
// their valid times; raw, corrected and stochastic are compared side by side, with the
// stochastic-stage advice, and the warnings are verified (core verifyStoredRecords, from the runs'
// verification records, src/core/verification/run-record.ts).
import { createHash } from 'node:crypto';
import type { UpdatingSplit } from '../core/correction/updating-split.ts';
import { formatDurationSeconds } from '../core/iso-duration.ts';
import { adviseStochasticStage, type ComparisonReport, type StochasticAdvice, type WarningReport } from '../core/verification/index.ts';
import { buildRunRecord, packRecords, RUN_RECORD_FORMAT, thresholdsKey, type RunRecordInput } from '../core/verification/run-record.ts';
import { verifyStoredRecords, type StoredRunMeta, type StoredVerificationInput, type StoredVerificationResult } from '../core/verification/stored-verification.ts';
import { readObservations } from '../store/archive-repo.ts';
import type { Queryable } from '../store/db.ts';
import type { Gauge } from '../store/gauges-repo.ts';
import { getActiveModelVersion } from '../store/models-repo.ts';
import { readRunRecords, readRunsForVerification, upsertRunRecords, type RunForVerification } from '../store/verification-repo.ts';
import { PoolFullError } from '../workers/correction-pool.ts';
import { CAUTION } from './caution.ts';
import type { ForecastView } from './forecast-view.ts';
import { Problem } from './problem.ts';
import { isoUtc } from './series-input.ts';
import { StageClock } from './stage-clock.ts';
import { rfc3339Ms } from '../core/rfc3339.ts';

/** byLead entries also name their lead time as an ISO 8601 duration (lead index 0 = one step). */
export function withLeadTimes(report: ComparisonReport, stepSeconds: number): ComparisonReport {
  for (const s of [report.raw, report.corrected, report.stochastic]) {
    if (!s) continue;
    for (const l of s.byLead) (l as typeof l & { leadTime: string }).leadTime = formatDurationSeconds((l.lead + 1) * stepSeconds);
  }
  return report;
}

const PAGE = 1000;

export const DEGRADED_HANDLING =
  'Degraded runs (served without the residual model: the stochastic stage ran on the raw members with the raw-error archive) have no corrected ensemble. They are left out of all three columns, so raw, corrected and stochastic are scored on exactly the same cases, and are counted under degraded.';

export const STOCHASTIC_FROM = 'The stochastic stage is scored from the quantiles stored with each run at the 100 midpoint levels (i − 0.5)/100, as a 100-member ensemble.';

export const BY_UPDATING_NOTE =
  'Runs served with and without issue-time updating, scored apart. They are different runs, not the same issues both ways: updating is off only when no observation recent enough was stored or the version has no updater. A hindcast scores the same issues both ways.';

export interface StoredVerification {
  gaugeId: string;
  unit: 'm3/s';
  window: { from: string | null; to: string | null };
  leadRange: { min: number | null; max: number | null };
  source: string | null;
  runs: { total: number; verified: number; corrected: number; degraded: number; sources: Record<string, number>; modelVersions: { id: string | null; runs: number }[] };
  degraded: { runs: number; cases: number; handling: string };
  stochasticFrom: string;
  thresholds: { label: string; value: number }[];
  comparison: ComparisonReport;
  /**
   * The same runs apart by whether they were served with issue-time updating; null when none was.
   * Different runs, not the same issues both ways (a hindcast gives that): updating is off only
   * when no recent observation was stored or the version has no updater.
   */
  byUpdating: (UpdatingSplit & { note: string }) | null;
  advice: StochasticAdvice;
  /** The warnings (core verifyStoredRecords, src/core/verification/stored-verification.ts); null when no corrected run has been issued with the gauge's thresholds. */
  warningScores: (WarningReport & { references: { climatology: string; rates: string | null }; skipped: { degraded: number; thresholdsChanged: number } }) | null;
  caution: string;
  notes: string[];
}

/** Runs the aggregation off the event loop (src/workers/correction-pool.ts); without one it runs here. */
export interface VerificationRunner {
  verify(input: StoredVerificationInput): Promise<StoredVerificationResult>;
}

/**
 * Matches every stored run's lead times with the observations at their valid times and compares
 * raw, corrected and stochastic side by side, with the warnings. Each run is read as its
 * verification record (built when the run was stored, or here on first read for older runs and
 * after the gauge's thresholds changed); the observations are read whole each time, so every
 * score follows the latest revision of them. The aggregation (core verifyStoredRecords:
 * scores, bootstrap, diagrams) runs in a worker when a runner is given.
 */
export async function verifyStoredRuns(
  db: Queryable,
  gauge: Gauge,
  q: { fromMs?: number; toMs?: number; minLead?: number; maxLead?: number; source?: string; attentionLevel?: number },
  clock: StageClock = new StageClock(),
  runner: VerificationRunner | null = null,
): Promise<StoredVerification> {
  const key = thresholdsKey(gauge.thresholds);
  const window = { gaugeId: gauge.id, fromMs: q.fromMs, toMs: q.toMs, source: q.source };
  /** The runs in the window, in issue order, with or without their records' bytes; stale: those without a usable record. */
  const readRuns = async (withBytes: boolean) => {
    const metas: StoredRunMeta[] = [];
    const bytes: Uint8Array[] = [];
    const stale: number[] = [];
    let after: { issueMs: number; id: string } | undefined;
    for (;;) {
      const page = await readRunRecords(db, { ...window, after, limit: PAGE }, withBytes);
      for (const r of page) {
        if (!r.record || r.record.format !== RUN_RECORD_FORMAT || r.record.thresholdsKey !== key) stale.push(metas.length);
        metas.push({ id: r.id, issueMs: r.issueMs, source: r.source, status: r.status, modelVersionId: r.modelVersionId });
        bytes.push(r.record?.bytes ?? EMPTY);
      }
      if (page.length < PAGE) break;
      const last = page[page.length - 1];
      after = { issueMs: last.issueMs, id: last.id };
    }
    return { metas, bytes, stale };
  };
  const obs = await readObservations(db, gauge.id, {});
  const times = new Float64Array(obs.length);
  const values = new Float64Array(obs.length);
  obs.forEach((o, i) => {
    times[i] = o.t;
    values[i] = o.value === null ? NaN : o.value;
  });
  const active = await getActiveModelVersion(db, gauge.id);
  const fitting = period(active?.periods?.calibration);
  clock.lap('read-observations');
  // An answer already computed from exactly these runs, observations and settings is given again.
  const listed = await readRuns(false);
  const askedKey = listed.stale.length ? null : answerKey(gauge, q, fitting, listed.metas, times, values);
  clock.lap('read-runs');
  const known = askedKey ? answers.get(askedKey) : undefined;
  if (known) {
    answers.delete(askedKey!);
    answers.set(askedKey!, known);
    return known;
  }
  const { metas, bytes, stale } = await readRuns(true);
  clock.lap('read-records');
  // Runs without a usable record (stored before records existed, or built for other thresholds): built now and kept.
  for (let i = 0; i < stale.length; i += BUILD_CHUNK) {
    const idx = stale.slice(i, i + BUILD_CHUNK);
    const runs = await readRunsForVerification(db, { gaugeId: gauge.id, ids: idx.map((j) => metas[j].id), limit: idx.length });
    const byId = new Map(runs.map((r) => [r.id, r]));
    const built: { runId: string; format: number; thresholdsKey: string; bytes: Uint8Array }[] = [];
    for (const j of idx) {
      const r = byId.get(metas[j].id);
      if (!r) throw new Error(`run ${metas[j].id} was deleted during its verification`);
      bytes[j] = buildRunRecord(recordInput(r), gauge.thresholds);
      built.push({ runId: r.id, format: RUN_RECORD_FORMAT, thresholdsKey: key, bytes: bytes[j] });
    }
    await upsertRunRecords(db, built);
  }
  if (stale.length) clock.lap('build-records');
  const input: StoredVerificationInput = {
    thresholds: gauge.thresholds.map((t) => ({ label: t.label, value: t.value })),
    stepMs: gauge.stepSeconds * 1000,
    // The attention level of the forecasts (config ATTENTION_LEVEL, whose default is 0.3).
    attentionLevel: q.attentionLevel ?? 0.3,
    fromMs: q.fromMs,
    minLead: q.minLead,
    maxLead: q.maxLead,
    fitting,
    observations: { times, values },
    runs: metas,
    records: packRecords(bytes),
  };
  clock.lap('pack');
  let out: StoredVerificationResult;
  try {
    out = runner ? await runner.verify(input) : verifyStoredRecords(input);
  } catch (err) {
    // The workers' queue is full: the client is told to retry, as a posted run would be.
    if (err instanceof PoolFullError) throw new Problem(503, 'busy', 'Busy', 'the worker queue is full; retry shortly', [], { 'retry-after': '2' });
    throw err;
  }
  // The whole aggregation as this thread waited for it, then its parts as measured where they ran.
  clock.lap('aggregate');
  for (const [stage, ms] of Object.entries(out.ms)) clock.add(`aggregate.${stage}`, ms);
  const report = withLeadTimes(out.comparison, gauge.stepSeconds);
  const advice = adviseStochasticStage(report);
  const w = out.warnings;
  const runs = out.runs;
  const notes: string[] = [];
  if (w.skipped.thresholdsChanged) notes.push(`${w.skipped.thresholdsChanged} runs issued with other thresholds than the gauge's present ones are left out of the warnings.`);
  if (runs.degraded) notes.push(`${runs.degraded} degraded runs (${out.degradedCases} observed lead times) are left out of the comparison; see degraded.handling.`);
  const versions = runs.modelVersions.map((v) => v.id).filter((v) => v !== null);
  if (versions.length > 1) notes.push(`Runs of ${versions.length} model versions are pooled (${versions.join(', ')}); narrow the window to judge one version.`);
  if (runs.total === 0) notes.push('No stored run in the window.');
  else if (report.cases.used === 0) notes.push('No lead time of these runs has an observation yet.');
  const answer: StoredVerification = {
    gaugeId: gauge.id,
    unit: 'm3/s',
    window: { from: q.fromMs !== undefined ? isoUtc(q.fromMs) : null, to: q.toMs !== undefined ? isoUtc(q.toMs) : null },
    leadRange: { min: q.minLead ?? null, max: q.maxLead ?? null },
    source: q.source ?? null,
    runs,
    degraded: { runs: runs.degraded, cases: out.degradedCases, handling: DEGRADED_HANDLING },
    stochasticFrom: STOCHASTIC_FROM,
    thresholds: gauge.thresholds,
    comparison: report,
    byUpdating: out.byUpdating ? { ...out.byUpdating, note: BY_UPDATING_NOTE } : null,
    advice,
    warningScores: w.report ? { ...w.report, references: w.references, skipped: w.skipped } : null,
    caution: CAUTION,
    notes,
  };
  // Kept under the key of the runs actually read (a run stored meanwhile gives another key).
  answers.set(answerKey(gauge, q, fitting, metas, times, values), answer);
  while (answers.size > ANSWERS_KEPT) answers.delete(answers.keys().next().value!);
  return answer;
}

/**
 * Recent answers by the content they were computed from. The key covers every input of the
 * answer — the gauge's id, step and thresholds, the query, the fitting period, each run's id,
 * status, source and model version (runs are never changed once stored, and a record is a
 * function of its run and the thresholds) and every observation's time and value — so any new
 * run, revised observation or changed setting gives a new key: a kept answer is never stale.
 */
const answers = new Map<string, StoredVerification>();
const ANSWERS_KEPT = 8;

/** Drops the kept answers (tests that must see the aggregation run). */
export function forgetVerificationAnswers(): void {
  answers.clear();
}

function answerKey(
  gauge: Gauge,
  q: Record<string, unknown>,
  fitting: { fromMs: number; toMs: number } | null,
  metas: StoredRunMeta[],
  times: Float64Array,
  values: Float64Array,
): string {
  const h = createHash('sha256');
  h.update(JSON.stringify({ format: RUN_RECORD_FORMAT, gauge: gauge.id, stepSeconds: gauge.stepSeconds, thresholds: gauge.thresholds, q, fitting }));
  for (const m of metas) h.update(`\n${m.id}\t${m.issueMs}\t${m.status}\t${m.source}\t${m.modelVersionId}`);
  h.update(new Uint8Array(times.buffer, times.byteOffset, times.byteLength));
  h.update(new Uint8Array(values.buffer, values.byteOffset, values.byteLength));
  return h.digest('base64url');
}

const EMPTY = new Uint8Array(0);
const BUILD_CHUNK = 200;

/** What a run's record is built from, as the store reads the run. */
export function recordInput(r: RunForVerification): RunRecordInput {
  return { validMs: r.validTimes.map((v) => rfc3339Ms(v)), raw: r.raw, corrected: r.corrected, percentiles: r.percentiles, updated: r.updated, issued: r.issued };
}

/** What a run's record is built from, from the answer just built for it (before it is stored) and its stage quantiles. */
export function recordInputFromView(view: ForecastView, percentiles: number[][]): RunRecordInput {
  return {
    validMs: view.validTimes.map((v) => rfc3339Ms(v)),
    raw: view.ensemble.raw,
    corrected: view.ensemble.corrected,
    percentiles,
    updated: view.updating?.status === 'on',
    issued: view.thresholds,
  };
}

/**
 * Builds and stores the record of a run just stored (called after insertRun). A failure leaves the
 * run without one; its first verification builds it.
 */
export async function storeRunRecord(db: Queryable, gauge: Gauge, runId: string, r: RunRecordInput): Promise<void> {
  await upsertRunRecords(db, [{ runId, format: RUN_RECORD_FORMAT, thresholdsKey: thresholdsKey(gauge.thresholds), bytes: buildRunRecord(r, gauge.thresholds) }]);
}

/** A version's stored period ({from, to} RFC 3339), or null. */
function period(p: unknown): { fromMs: number; toMs: number } | null {
  const v = p as { from?: unknown; to?: unknown } | null | undefined;
  if (!v || typeof v.from !== 'string' || typeof v.to !== 'string') return null;
  const fromMs = rfc3339Ms(v.from);
  const toMs = rfc3339Ms(v.to);
  return Number.isFinite(fromMs) && Number.isFinite(toMs) ? { fromMs, toMs } : null;
}
