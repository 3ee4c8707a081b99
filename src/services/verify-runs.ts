// Use case: verify stored runs. Every stored run's lead times are matched with the observations at
// their valid times and raw, corrected and stochastic are compared side by side (core
// compareForecasts, streamed page by page), with the stochastic-stage advice.
import { updatingSplit, type UpdatingSplit } from '../core/correction/updating-split.ts';
import { formatDurationSeconds } from '../core/iso-duration.ts';
import { adviseStochasticStage, createComparison, midpointProbs, type ComparisonReport, type StochasticAdvice, type WarningReport } from '../core/verification/index.ts';
import { readObservations } from '../store/archive-repo.ts';
import type { Queryable } from '../store/db.ts';
import type { Gauge } from '../store/gauges-repo.ts';
import { readRunsForVerification } from '../store/verification-repo.ts';
import { CAUTION } from './caution.ts';
import { isoUtc } from './series-input.ts';
import { startStoredWarnings } from './verify-warnings.ts';
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

const PAGE = 500;

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
  /** The warnings (src/services/verify-warnings.ts); null when no corrected run has been issued with the gauge's thresholds. */
  warningScores: (WarningReport & { references: { climatology: string; rates: string | null }; skipped: { degraded: number; thresholdsChanged: number } }) | null;
  caution: string;
  notes: string[];
}

/**
 * Matches every stored run's lead times with the observations at their valid times and compares
 * raw, corrected and stochastic side by side (core compareForecasts, streamed page by page).
 */
export async function verifyStoredRuns(
  db: Queryable,
  gauge: Gauge,
  q: { fromMs?: number; toMs?: number; minLead?: number; maxLead?: number; source?: string; attentionLevel?: number },
  clock: StageClock = new StageClock(),
): Promise<StoredVerification> {
  const leadRange = q.minLead !== undefined || q.maxLead !== undefined ? { min: q.minLead !== undefined ? q.minLead - 1 : undefined, max: q.maxLead !== undefined ? q.maxLead - 1 : undefined } : null;
  // The attention level of the forecasts (config ATTENTION_LEVEL, whose default is 0.3).
  const warnings = await startStoredWarnings(db, gauge, { attentionLevel: q.attentionLevel ?? 0.3, fromMs: q.fromMs, leadRange });
  clock.lap('warnings-setup');
  const comparison = createComparison({
    seed: 1,
    thresholds: gauge.thresholds.map((t) => t.value),
    leadRange,
    includeStochastic: true,
  });
  const minK = (q.minLead ?? 1) - 1;
  const maxK = (q.maxLead ?? Infinity) - 1;
  const runs = { total: 0, verified: 0, corrected: 0, degraded: 0, sources: {} as Record<string, number>, modelVersions: new Map<string | null, number>() };
  const split = updatingSplit();
  let anyUpdated = false;
  let degradedCases = 0;
  const grids = new Map<number, Float64Array>();
  let rawBuf = new Float64Array(64);
  let corBuf = new Float64Array(64);
  let after: { issueMs: number; id: string } | undefined;
  for (;;) {
    clock.lap('scores');
    const page = await readRunsForVerification(db, { gaugeId: gauge.id, fromMs: q.fromMs, toMs: q.toMs, source: q.source, after, limit: PAGE });
    clock.lap('read-runs');
    if (!page.length) break;
    let lo = Infinity;
    let hi = -Infinity;
    for (const r of page) {
      if (!r.validTimes.length) continue;
      lo = Math.min(lo, rfc3339Ms(r.validTimes[0]));
      hi = Math.max(hi, rfc3339Ms(r.validTimes[r.validTimes.length - 1]));
    }
    const obs = new Map<number, number>();
    if (lo <= hi) for (const o of await readObservations(db, gauge.id, { fromMs: lo, toMs: hi + 1 })) if (o.value !== null) obs.set(o.t, o.value);
    clock.lap('read-observations');
    for (const r of page) {
      runs.total++;
      runs[r.status]++;
      runs.sources[r.source] = (runs.sources[r.source] ?? 0) + 1;
      runs.modelVersions.set(r.modelVersionId, (runs.modelVersions.get(r.modelVersionId) ?? 0) + 1);
      const M = r.raw.length;
      if (rawBuf.length < M) {
        rawBuf = new Float64Array(M);
        corBuf = new Float64Array(M);
      }
      let verified = false;
      if (r.status === 'corrected' && r.corrected) {
        split.addRun(r.updated);
        anyUpdated ||= r.updated;
      }
      r.validTimes.forEach((vt, k) => {
        const y = obs.get(rfc3339Ms(vt));
        if (y === undefined) return;
        verified = true;
        if (r.status === 'degraded' || !r.corrected) {
          if (k >= minK && k <= maxK) degradedCases++;
          return;
        }
        const raw = rawBuf.subarray(0, M);
        const cor = corBuf.subarray(0, r.corrected.length);
        for (let m = 0; m < M; m++) raw[m] = r.raw[m].values[k];
        for (let m = 0; m < r.corrected.length; m++) cor[m] = r.corrected[m].values[k];
        const values = r.percentiles[k] ?? [];
        let probs = grids.get(values.length);
        if (!probs && values.length) grids.set(values.length, (probs = midpointProbs(values.length)));
        comparison.add({ lead: k, observation: y, raw, corrected: cor, stochasticQuantiles: probs ? { probs, values } : null, validTime: vt });
        if (k >= minK && k <= maxK) split.addCase(r.updated, k, y, cor, values.length ? values : null);
      });
      if (verified) runs.verified++;
      warnings.addRun(r);
    }
    const last = page[page.length - 1];
    after = { issueMs: last.issueMs, id: last.id };
    if (page.length < PAGE) break;
  }
  clock.lap('scores');
  const report = withLeadTimes(comparison.result(), gauge.stepSeconds);
  const advice = adviseStochasticStage(report);
  clock.lap('comparison-result');
  const w = warnings.result();
  clock.lap('warnings-result');
  const notes: string[] = [];
  if (w.skipped.thresholdsChanged) notes.push(`${w.skipped.thresholdsChanged} runs issued with other thresholds than the gauge's present ones are left out of the warnings.`);
  if (runs.degraded) notes.push(`${runs.degraded} degraded runs (${degradedCases} observed lead times) are left out of the comparison; see degraded.handling.`);
  const versions = [...runs.modelVersions.keys()].filter((v) => v !== null);
  if (versions.length > 1) notes.push(`Runs of ${versions.length} model versions are pooled (${versions.join(', ')}); narrow the window to judge one version.`);
  if (runs.total === 0) notes.push('No stored run in the window.');
  else if (report.cases.used === 0) notes.push('No lead time of these runs has an observation yet.');
  return {
    gaugeId: gauge.id,
    unit: 'm3/s',
    window: { from: q.fromMs !== undefined ? isoUtc(q.fromMs) : null, to: q.toMs !== undefined ? isoUtc(q.toMs) : null },
    leadRange: { min: q.minLead ?? null, max: q.maxLead ?? null },
    source: q.source ?? null,
    runs: { ...runs, modelVersions: [...runs.modelVersions].map(([id, n]) => ({ id, runs: n })) },
    degraded: { runs: runs.degraded, cases: degradedCases, handling: DEGRADED_HANDLING },
    stochasticFrom: STOCHASTIC_FROM,
    thresholds: gauge.thresholds,
    comparison: report,
    byUpdating: anyUpdated ? { ...split.result(), note: BY_UPDATING_NOTE } : null,
    advice,
    warningScores: w.report ? { ...w.report, references: w.references, skipped: w.skipped } : null,
    caution: CAUTION,
    notes,
  };
}

