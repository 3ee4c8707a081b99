// The drift watch per gauge: recent corrected runs of the active model version, verified against
// the observations that arrived since, held to the version's validation level (core watchDrift).
// The result is stored in gauge_status, so the overview, the gauge and /metrics only read a row.
// Refreshed after observations are posted (after the commit, off the request), after a hindcast
// stores a version's level, and on the job runner's schedule (refreshAllGaugeStatuses, src/jobs/handlers.ts).
import { midpointProbs, watchDrift, type QuantileForecast, type VerificationCase } from '../core/verification/index.ts';
import { readObservations } from '../store/archive-repo.ts';
import type { Queryable } from '../store/db.ts';
import { getDriftReference, referenceJob, saveGaugeStatus, type GaugeStatusRecord } from '../store/gauge-status-repo.ts';
import { getGauge, listGauges } from '../store/gauges-repo.ts';
import { enqueueJob } from '../store/jobs-repo.ts';
import { getActiveModelVersion } from '../store/models-repo.ts';
import { hasRuns, latestObservationMs, readRecentRunPercentiles } from '../store/verification-repo.ts';
import { referenceHindcastParams } from './hindcast-params.ts';

/** Window of the watch: runs issued in the last 60 days before the newest observation (common practice). */
export const DRIFT_WINDOW_DAYS = 60;
/** At most this many runs and the most recent this many verified cases are read (bounds the cost). */
export const DRIFT_MAX_RUNS = 200;
export const DRIFT_MAX_CASES = 1000;
/** Fewest verified cases for a status (core default, common practice). */
export const DRIFT_MIN_CASES = 30;

const DAY_MS = 86_400_000;
const iso = (ms: number) => new Date(ms).toISOString().replace('.000Z', 'Z');
const EMPTY: number[] = [];

export type GaugeStatusInput = Omit<GaugeStatusRecord, 'computedAt'>;

/** Computes a gauge's drift status (null when the gauge is gone). May enqueue the reference hindcast. */
export async function computeGaugeStatus(db: Queryable, gaugeId: string): Promise<GaugeStatusInput | null> {
  const gauge = await getGauge(db, gaugeId);
  if (!gauge) return null;
  const active = await getActiveModelVersion(db, gaugeId);
  const insufficient = (reasons: string[], evidence: Record<string, unknown>): GaugeStatusInput => ({
    gaugeId,
    status: 'insufficient-data',
    modelVersionId: active?.id ?? null,
    reasons,
    evidence: { source: 'stochastic', ...evidence },
  });
  if (!active) return insufficient(['No active residual model: the drift watch holds the corrected forecasts of a model version to its validation level.'], { cases: 0 });
  const latest = await latestObservationMs(db, gaugeId);
  if (latest === null) return insufficient(['No observations yet.'], { cases: 0 });

  const stepMs = gauge.stepSeconds * 1000;
  const windowFrom = latest - DRIFT_WINDOW_DAYS * DAY_MS;
  const runs = (await readRecentRunPercentiles(db, gaugeId, active.id, windowFrom, DRIFT_MAX_RUNS)).reverse();
  let maxH = 0;
  for (const r of runs) maxH = Math.max(maxH, r.percentiles.length);
  const window = { days: DRIFT_WINDOW_DAYS, fromIssueTime: iso(windowFrom), toObservation: iso(latest), runs: runs.length, modelVersion: active.id };
  const cases: VerificationCase[] = [];
  if (runs.length) {
    const obs = new Map<number, number>();
    for (const o of await readObservations(db, gaugeId, { fromMs: runs[0].issueMs + stepMs, toMs: runs[runs.length - 1].issueMs + (maxH + 1) * stepMs })) {
      if (o.value !== null) obs.set(o.t, o.value);
    }
    const grids = new Map<number, Float64Array>();
    for (const r of runs) {
      r.percentiles.forEach((values, k) => {
        const valid = r.issueMs + (k + 1) * stepMs;
        const y = obs.get(valid);
        if (y === undefined || !values?.length) return;
        let probs = grids.get(values.length);
        if (!probs) grids.set(values.length, (probs = midpointProbs(values.length)));
        const q: QuantileForecast = { probs, values };
        cases.push({ lead: k, observation: y, raw: EMPTY, corrected: EMPTY, stochasticQuantiles: q, validTime: iso(valid), issueTime: iso(r.issueMs) });
      });
    }
    cases.sort((a, b) => (a.validTime! < b.validTime! ? -1 : a.validTime! > b.validTime! ? 1 : 0));
  }

  const reference = await getDriftReference(db, active.id);
  if (!reference) {
    const reasons = [`No validation level stored for model version ${active.id} yet.`];
    let job = await referenceJob(db, gaugeId, active.id);
    if (!job && cases.length >= DRIFT_MIN_CASES) {
      const created = await enqueueJob(db, 'hindcast', gaugeId, referenceHindcastParams(active.id, maxH || null), null);
      job = { id: created.id, status: created.status };
    }
    if (job && (job.status === 'failed' || job.status === 'cancelled')) {
      reasons.push(`The hindcast that measures it (job ${job.id}) ${job.status}; start one over the validation period with POST /gauges/${gaugeId}/hindcasts.`);
    } else if (job) reasons.push(`Hindcast job ${job.id} (${job.status}) is measuring it over the version's validation period.`);
    else reasons.push(`It is measured by a hindcast over the validation period, started once ${DRIFT_MIN_CASES} recent cases are verified (${cases.length} so far).`);
    return insufficient(reasons, { cases: cases.length, reference: null, referenceJob: job, window });
  }
  const d = watchDrift(cases, { coverage90: reference.coverage90, crps: reference.crps }, {
    source: 'stochastic',
    lastCases: DRIFT_MAX_CASES,
    minCases: DRIFT_MIN_CASES,
    // A run's lead times share its errors: each run counts once in the coverage test.
    testUnits: 'issues',
  });
  // The block the archives were built from: the held-out archive block, or (older versions and
  // uploads) the whole validation period.
  const archiveBlock = active.periods.archive ?? active.periods.validation;
  const p = reference.basis.period;
  if (archiveBlock?.from && archiveBlock.to && p.from < archiveBlock.to && p.to > archiveBlock.from) {
    d.reasons.push(
      `The level was measured in-sample: on the period from which the stage's error archives were built (${archiveBlock.from} to ${archiveBlock.to}), so it is optimistic; a level from reforecasts of a later period is fairer (POST /gauges/${gaugeId}/hindcasts with mode reforecast, from, to and setDriftLevel).`,
    );
  }
  if (reference.basis.mode === 'simulation') {
    d.reasons.push(
      `The level comes from a simulation-mode hindcast (hindcast ${reference.basis.jobId}): pseudo-forecasts without forcing error, so it is stricter than real forecasts can meet; store reforecasts of the validation period for a fair level.`,
    );
  }
  return {
    gaugeId,
    status: d.status,
    modelVersionId: active.id,
    reasons: d.reasons,
    evidence: { ...d.evidence, reference: { coverage90: reference.coverage90, crps: reference.crps, ...reference.basis }, window },
  };
}

export async function refreshGaugeStatus(db: Queryable, gaugeId: string): Promise<GaugeStatusInput | null> {
  // A gauge without runs shows 'no-forecast' whatever its drift row says: nothing to do.
  if (!(await hasRuns(db, gaugeId))) return null;
  const s = await computeGaugeStatus(db, gaugeId);
  if (s) await saveGaugeStatus(db, s);
  return s;
}

interface Pending {
  again: boolean;
  done: Promise<void>;
}
const pending = new WeakMap<object, Map<string, Pending>>();

/**
 * Refreshes a gauge's status soon, off the caller's path. Requests while one is running for the
 * same gauge are folded into one more run after it.
 */
export function scheduleGaugeStatusRefresh(db: Queryable, gaugeId: string, log?: { warn: (o: object, msg: string) => void }): void {
  let byGauge = pending.get(db);
  if (!byGauge) pending.set(db, (byGauge = new Map()));
  const current = byGauge.get(gaugeId);
  if (current) {
    current.again = true;
    return;
  }
  const entry: Pending = { again: true, done: Promise.resolve() };
  entry.done = new Promise<void>((resolve) => setImmediate(resolve)).then(async () => {
    while (entry.again) {
      entry.again = false;
      try {
        await refreshGaugeStatus(db, gaugeId);
      } catch (err) {
        log?.warn({ gauge: gaugeId, err: (err as Error).message }, 'drift status refresh failed');
      }
    }
    byGauge.delete(gaugeId);
  });
  byGauge.set(gaugeId, entry);
}

/** Resolves when no refresh is pending for this database (tests, shutdown). */
export async function settleGaugeStatusRefreshes(db: Queryable): Promise<void> {
  const byGauge = pending.get(db);
  while (byGauge && byGauge.size) await Promise.all([...byGauge.values()].map((p) => p.done));
}

/** Refreshes every gauge's status (the periodic refresh; observations also trigger one per gauge). */
export async function refreshAllGaugeStatuses(db: Queryable, log?: { warn: (o: object, msg: string) => void }): Promise<void> {
  for (const g of await listGauges(db)) scheduleGaugeStatusRefresh(db, g.id, log);
  await settleGaugeStatusRefreshes(db);
}
