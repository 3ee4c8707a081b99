// Use case: run a hindcast. A request is checked and queued (requestHindcast); the job then reads
// the archive and the version's model and error archive, runs the whole correction pipeline over
// the period in a compute worker (src/models/hindcast-compute.ts, pure verification in
// src/core/verification/hindcast.ts), and assembles the stored result with its warnings.
import type { Period } from '../core/archive-types.ts';
import { checkResidualSpec, requiredRunInputs } from '../core/features/model-inputs.ts';
import { formatDurationSeconds } from '../core/iso-duration.ts';
import type { SourceName } from '../core/verification/index.ts';
import type { HindcastOutput, HindcastSettings } from '../models/hindcast-compute.ts';
import { readObservations, readReforecasts } from '../store/archive-repo.ts';
import { loadArchiveSeries } from '../store/archive-series.ts';
import type { Db } from '../store/db.ts';
import { saveDriftReference } from '../store/gauge-status-repo.ts';
import { insertHindcastIssues, readHindcastIssues } from '../store/hindcast-issues-repo.ts';
import { getGauge, type Gauge } from '../store/gauges-repo.ts';
import { enqueueJob, type Job } from '../store/jobs-repo.ts';
import { getActiveModelVersion, getModelVersion, modelParts, versionArchive } from '../store/models-repo.ts';
import { correctedArchiveFor, reforecastIssueTimes } from '../store/verification-repo.ts';
import { runCompute } from '../workers/run-compute.ts';
import { CAUTION } from './caution.ts';
import { refreshGaugeStatus } from './drift.ts';
import { withLeadTimes } from './verify-runs.ts';
import type { HindcastJobParams } from './hindcast-params.ts';
import type { JobHold, JobProgress } from './job-progress.ts';
import { conflict, invalid, type FieldError } from './problem.ts';
import { isoUtc } from './series-input.ts';
import { rfc3339Ms } from '../core/rfc3339.ts';

export const REFERENCE_MIN_REFORECASTS = 20;

const iso = (ms: number) => new Date(ms).toISOString().replace('.000Z', 'Z');

/** A version's stored period ({from, to} RFC 3339) in epoch ms, or null. */
export function storedPeriod(p: { from: string; to: string } | undefined): Period | null {
  if (!p) return null;
  const fromMs = rfc3339Ms(p.from);
  const toMs = rfc3339Ms(p.to);
  return Number.isFinite(fromMs) && Number.isFinite(toMs) ? { fromMs, toMs } : null;
}

/** The gauge's observations before a time, as arrays (the warnings' references). */
async function observationArrays(db: Db, gaugeId: string, beforeMs: number): Promise<{ times: Float64Array; values: Float64Array }> {
  const rows = await readObservations(db, gaugeId, { toMs: beforeMs });
  return { times: Float64Array.from(rows, (r) => r.t), values: Float64Array.from(rows, (r) => (r.value === null ? NaN : r.value)) };
}

/** Issues whose valid times (issue + 1 … H steps) fall at least partly inside a period. */
function overlapping(issueTimes: number[], stepMs: number, H: number, p: Period | null): number {
  if (!p) return 0;
  let n = 0;
  for (const t of issueTimes) if (t + stepMs < p.toMs && t + H * stepMs >= p.fromMs) n++;
  return n;
}

/** What a hindcast request asks for, with the API's defaults applied. */
export interface HindcastRequest {
  mode: 'simulation' | 'reforecast';
  version?: string;
  from?: string;
  to?: string;
  horizon?: number;
  everySteps: number;
  trajectories: number;
  seed: number;
  seasonalWindowDays: number | null;
  setDriftLevel: boolean;
  minLead?: number;
  maxLead?: number;
  sizeStudy: { sources: SourceName[]; sizes: number[]; repeats: number; caseFraction?: number };
}

/**
 * Checks a hindcast request against the stored version, its archives and the reforecasts, and
 * queues the job. Refusals name the body field; nothing is queued then.
 */
export async function requestHindcast(db: Db, gauge: Gauge, body: HindcastRequest, limits: { maxTrajectories: number; attentionLevel?: number }, createdBy: string | null): Promise<Job> {
  const version = body.version ? await getModelVersion(db, gauge.id, body.version) : await getActiveModelVersion(db, gauge.id);
  if (!version) {
    if (body.version) throw invalid([{ path: 'body.version', message: `gauge ${gauge.id} has no model version ${body.version}` }]);
    throw conflict(`gauge ${gauge.id} has no active residual model; fit one (POST /gauges/${gauge.id}/models/fit) or name a version`);
  }
  const errors: FieldError[] = [];
  const reach = (await correctedArchiveFor(db, version.id, 1)).maxReach;
  if (!reach) throw conflict(`model version ${version.id} has no corrected-member error archive`);
  if (body.horizon !== undefined && body.horizon > reach) errors.push({ path: 'body.horizon', message: `the error archives of version ${version.id} cover at most ${reach} lead times` });
  if (body.trajectories > limits.maxTrajectories) errors.push({ path: 'body.trajectories', message: `at most ${limits.maxTrajectories}` });
  const validation = storedPeriod(version.periods.validation);
  if ((!body.from || !body.to) && !validation) errors.push({ path: body.from ? 'body.to' : 'body.from', message: `model version ${version.id} records no validation period; give from and to` });
  const fromMs = body.from ? rfc3339Ms(body.from) : validation?.fromMs;
  const toMs = body.to ? rfc3339Ms(body.to) : validation?.toMs;
  if (fromMs !== undefined && toMs !== undefined && !(fromMs < toMs)) errors.push({ path: 'body.to', message: 'the period is empty (from must be before to)' });
  if (!errors.length && body.mode === 'reforecast' && (await reforecastIssueTimes(db, gauge.id, fromMs!, toMs!)).length === 0) {
    errors.push({ path: 'body.mode', message: `gauge ${gauge.id} has no reforecasts issued between ${isoUtc(fromMs!)} and ${isoUtc(toMs!)}` });
  }
  if (errors.length) throw invalid(errors);
  const params: HindcastJobParams = {
    mode: body.mode,
    versionId: version.id,
    from: isoUtc(fromMs!),
    to: isoUtc(toMs!),
    horizon: body.horizon ?? null,
    everySteps: body.everySteps,
    trajectories: body.trajectories,
    seed: body.seed,
    seasonalWindowDays: body.seasonalWindowDays,
    minLead: body.minLead ?? null,
    maxLead: body.maxLead ?? null,
    sizeStudy: { sources: body.sizeStudy.sources, sizes: body.sizeStudy.sizes, repeats: body.sizeStudy.repeats, caseFraction: body.sizeStudy.caseFraction ?? null },
    purpose: 'request',
    setDriftLevel: body.setDriftLevel,
    attentionLevel: limits.attentionLevel ?? 0.3,
  };
  return enqueueJob(db, 'hindcast', gauge.id, params, createdBy);
}

/** A hindcast job's work, from the stored archive to the result the job keeps. */
export async function runHindcast(db: Db, job: { id: string; gaugeId: string; hold?: JobHold }, p: HindcastJobParams, progress: JobProgress, signal: AbortSignal) {
  const gauge = await getGauge(db, job.gaugeId);
  if (!gauge) throw new Error(`gauge ${job.gaugeId} no longer exists`);
  const version = await getModelVersion(db, gauge.id, p.versionId);
  if (!version) throw new Error(`model version ${p.versionId} of gauge ${gauge.id} no longer exists`);
  const reach = (await correctedArchiveFor(db, version.id, 1)).maxReach;
  if (!reach) throw new Error(`model version ${version.id} has no corrected-member error archive`);
  const stepMs = gauge.stepSeconds * 1000;
  const calibration = storedPeriod(version.periods.calibration);
  const validation = storedPeriod(version.periods.validation);
  const fromMs = p.from ? rfc3339Ms(p.from) : validation?.fromMs;
  const toMs = p.to ? rfc3339Ms(p.to) : validation?.toMs;
  if (fromMs === undefined || toMs === undefined) throw new Error(`no period given and model version ${version.id} records no validation period`);
  await progress('loading the archive', 1);

  let mode: 'simulation' | 'reforecast' = p.mode === 'auto' ? 'simulation' : p.mode;
  if (p.mode === 'auto' && (await reforecastIssueTimes(db, gauge.id, fromMs, toMs)).length >= REFERENCE_MIN_REFORECASTS) mode = 'reforecast';
  const spec = checkResidualSpec(version.featureSpec);
  const need = requiredRunInputs(spec);
  const warm = Math.max(need.simStepsToIssue, ...need.forcings.map((f) => f.stepsToIssue));

  // Reforecast mode: stored runs grouped by issue time and member.
  let stored: Map<number, Map<string, Float64Array>> | null = null;
  let maxLead = 0;
  if (mode === 'reforecast') {
    stored = new Map();
    for (const r of await readReforecasts(db, gauge.id, { fromMs, toMs })) {
      let byMember = stored.get(r.t);
      if (!byMember) stored.set(r.t, (byMember = new Map()));
      let v = byMember.get(r.member_id);
      if (!v) byMember.set(r.member_id, (v = new Float64Array(0)));
      if (r.lead > v.length) {
        const grown = new Float64Array(r.lead).fill(NaN);
        grown.set(v);
        byMember.set(r.member_id, (v = grown));
      }
      v[r.lead - 1] = r.value ?? NaN;
      if (r.lead > maxLead) maxLead = r.lead;
    }
    if (!stored.size) throw new Error(`gauge ${gauge.id} has no reforecasts issued between ${iso(fromMs)} and ${iso(toMs)}`);
  }
  let H = p.horizon ?? (mode === 'reforecast' ? Math.min(maxLead, reach) : Math.min(10, reach));
  // A reference job takes the operational runs' horizon where the archive and reforecasts reach it.
  if (p.mode === 'auto') H = Math.min(H, reach, mode === 'reforecast' ? maxLead : H);
  if (H > reach) throw new Error(`the error archives cover ${reach} lead times; the hindcast asks for ${H}`);
  if (mode === 'reforecast' && H > maxLead) throw new Error(`the stored reforecasts reach ${maxLead} lead times; the hindcast asks for ${H}`);

  // The archive serving would use for runs of H lead times.
  const archive = (await correctedArchiveFor(db, version.id, H)).archive!;

  const series = await loadArchiveSeries(db, gauge.id, gauge.stepSeconds, { fromMs: fromMs - (warm + 1) * stepMs, toMs: toMs + (H + 1) * stepMs });
  const t0 = series.times[0];
  const n = series.times.length;
  const issueTimes: number[] = [];
  let reforecast: { values: Float64Array } | null = null;
  if (stored) {
    const ids = new Set<string>();
    for (const byMember of stored.values()) for (const id of byMember.keys()) ids.add(id);
    series.members = series.members.filter((m) => ids.has(m.id));
    if (!series.members.length) throw new Error('no reforecast member has a continuous simulation for the warm-up');
    for (const t of [...stored.keys()].sort((a, b) => a - b)) if ((t - t0) % stepMs === 0 && t >= t0 && t < t0 + n * stepMs) issueTimes.push(t);
    const M = series.members.length;
    const values = new Float64Array(issueTimes.length * M * H).fill(NaN);
    issueTimes.forEach((t, s) => {
      const byMember = stored!.get(t)!;
      series.members.forEach((m, k) => {
        const v = byMember.get(m.id);
        if (v) for (let h = 0; h < H && h < v.length; h++) values[(s * M + k) * H + h] = v[h];
      });
    });
    reforecast = { values };
  } else {
    const first = Math.max(0, Math.ceil((fromMs - t0) / stepMs));
    for (let i = first; i < n && t0 + i * stepMs < toMs; i += p.everySteps) issueTimes.push(t0 + i * stepMs);
  }
  if (!issueTimes.length) throw new Error(`no issue time between ${iso(fromMs)} and ${iso(toMs)} lies on the gauge's archive`);
  const issueIndex = Int32Array.from(issueTimes, (t) => Math.round((t - t0) / stepMs));

  const settings: HindcastSettings = {
    mode,
    horizon: H,
    seed: p.seed,
    nDraws: p.trajectories,
    seasonalWindowDays: p.seasonalWindowDays,
    thresholds: gauge.thresholds.map((t) => t.value),
    leadRange: p.minLead !== null || p.maxLead !== null ? { min: p.minLead !== null ? p.minLead - 1 : undefined, max: p.maxLead !== null ? p.maxLead - 1 : undefined } : null,
    sizeStudy: { ...p.sizeStudy, targetCases: 20_000 },
    warnings: {
      thresholds: gauge.thresholds,
      attentionLevel: p.attentionLevel,
      // References known at issue time: the observations before the period (seasonal climatology)
      // and the model's fitting period (climatological rates).
      observations: await observationArrays(db, gauge.id, fromMs),
      fitting: calibration,
    },
  };
  await progress('starting the compute worker', 3);
  // A version with an issue-time updater is also hindcast with updating, when its archive reaches H.
  const updArchive = version.updating ? await versionArchive(db, version.id, 'corrected', 'updating') : null;
  const updating = version.updating && updArchive && Number(updArchive.summary.nLeads ?? 0) >= H ? { model: version.updating, archive: updArchive.bytes } : null;
  const handle = runCompute<HindcastOutput>({ kind: 'hindcast', input: { series, issueIndex, reforecast, model: { spec: version.featureSpec, parts: await modelParts(db, version.id) }, archive: archive.bytes, settings, updating } }, (pr) => {
    void progress(pr.stage, 3 + pr.percent * 0.95);
  });
  if (signal.aborted) handle.cancel();
  signal.addEventListener('abort', () => handle.cancel());
  const out = await handle.result;
  await progress('storing the result', 99);

  const used = out.issues.used;
  const usedTimes = Array.from(out.issues.usedIndex, (i) => t0 + i * stepMs);
  // Each issue's output, kept so the hindcast can be read back issue by issue (all or nothing).
  const perIssueWidth = H * out.perIssue.fieldsPerLead + gauge.thresholds.length;
  await db.transaction(async (tx) => {
    await job.hold?.(tx);
    await insertHindcastIssues(tx, job.id, usedTimes.map((t, s) => ({ issueTimeMs: t, values: out.perIssue.values.subarray(s * perIssueWidth, (s + 1) * perIssueWidth) })));
  });
  const inCalibration = overlapping(usedTimes, stepMs, H, calibration);
  const inValidation = overlapping(usedTimes, stepMs, H, validation);
  const warnings: string[] = [];
  if (inCalibration > 0) {
    warnings.push(
      `The hindcast overlaps the model's calibration period (${iso(calibration!.fromMs)} – ${iso(calibration!.toMs)}) on ${inCalibration} of ${usedTimes.length} issues: the residual model was trained on those data, so the corrected and stochastic scores there are optimistic.`,
    );
  }
  if (inValidation > 0) {
    warnings.push(
      `The stochastic stage's error archives were built from the validation period (${iso(validation!.fromMs)} – ${iso(validation!.toMs)}), which ${inValidation} of ${usedTimes.length} issues overlap: there the stage resamples errors of the very period it is scored on.`,
    );
  }
  if (!calibration) {
    warnings.push(`Model version ${version.id} (${version.origin}) records no calibration period, so whether the hindcast overlaps the data it was trained on cannot be checked.`);
  }
  if (mode === 'simulation') {
    warnings.push('Simulation mode: the pseudo-forecasts are the members\' continuous simulations driven by observed forcings, so they carry no forcing error; real forecasts score worse, above all at long lead times.');
  } else {
    warnings.push('Reforecast mode: the residual model\'s feature rows use the archived (observed) forcings at the lead times, because the reforecasts\' own forcings are not stored.');
  }
  const skipped = out.issues.skippedMissingForecast + out.issues.skippedMissingInputs;
  if (skipped) warnings.push(`${skipped} of ${out.issues.given} issues were left out: ${out.issues.skippedMissingForecast} with a missing raw value, ${out.issues.skippedMissingInputs} with missing feature inputs or warm-up.`);

  let driftReference: Record<string, unknown> | null = null;
  if (out.driftReference) {
    const basis = { jobId: job.id, mode, period: { from: iso(fromMs), to: iso(toMs) }, cases: out.report.stochastic?.n ?? 0 };
    let stored = false;
    let note: string;
    if (!p.setDriftLevel) note = 'not stored: the hindcast was not asked to set the drift-watch level (setDriftLevel)';
    else if (inCalibration > 0) note = 'not stored: the period overlaps the calibration period';
    else {
      await saveDriftReference(db, { versionId: version.id, gaugeId: gauge.id, coverage90: out.driftReference.coverage90, crps: out.driftReference.crps, basis });
      stored = true;
      note = `stored as model version ${version.id}'s drift-watch level`;
    }
    driftReference = { ...out.driftReference, stored, note };
    if (stored) await refreshGaugeStatus(db, gauge.id).catch(() => undefined);
  }

  return {
    gaugeId: gauge.id,
    mode,
    purpose: p.purpose,
    modelVersion: { id: version.id, label: version.label },
    period: { from: iso(fromMs), to: iso(toMs) },
    issues: {
      first: usedTimes.length ? iso(usedTimes[0]) : null,
      last: usedTimes.length ? iso(usedTimes[usedTimes.length - 1]) : null,
      given: out.issues.given,
      used,
      skippedMissingForecast: out.issues.skippedMissingForecast,
      skippedMissingInputs: out.issues.skippedMissingInputs,
    },
    horizon: H,
    leadTimes: Array.from({ length: H }, (_, k) => formatDurationSeconds((k + 1) * gauge.stepSeconds)),
    leadRange: { min: p.minLead, max: p.maxLead },
    members: out.members,
    models: out.models,
    trajectories: p.trajectories,
    seed: p.seed,
    unit: 'm3/s',
    thresholds: gauge.thresholds,
    correction: out.correction,
    errorArchive: updating && updArchive
      ? { id: updArchive.id, leadMode: updArchive.leadMode, leadTimes: Number(updArchive.summary.nLeads ?? 0), cases: Number(updArchive.summary.cases ?? 0) }
      : { id: archive.id, leadMode: archive.leadMode, leadTimes: archive.reach, cases: Number(archive.summary.cases ?? 0) },
    overlap: { issues: usedTimes.length, calibration: inCalibration, validation: inValidation },
    warnings,
    cases: { verified: out.cases, unobserved: out.unobserved },
    comparison: { ...withLeadTimes(out.report, gauge.stepSeconds), sizeStudy: undefined },
    sizeStudy: out.report.sizeStudy,
    advice: out.advice,
    warningScores: out.warnings,
    caution: CAUTION,
    updating: out.updating
      ? { ...out.updating, note: `${out.updating.note} Updated on the observation at each issue time.` }
      : { status: 'not run', reason: version.updating ? `the updated members' error archive does not reach ${H} lead times` : `model version ${version.id} has no issue-time updater` },
    driftReference,
    perIssue: {
      issues: usedTimes.length,
      probabilities: out.perIssue.probs,
      note: 'each issue as a served run would have said it: observed flow, raw and corrected ensemble means, the stochastic stage\'s quantiles and exceedance probabilities (with issue-time updating where the version has it)',
      href: `/gauges/${gauge.id}/hindcasts/${job.id}/issues`,
    },
    timings: Object.fromEntries(Object.entries(out.timings).map(([k, v]) => [k, Math.round(v)])),
  };
}

/** What a hindcast's result says about its per-issue output (absent on hindcasts stored before it). */
export interface PerIssueInfo {
  issues: number;
  probabilities: number[];
}

/** One issue of a hindcast, as the download gives it. */
export interface HindcastIssue {
  issueTime: string;
  leads: { leadTime: string; validTime: string; observed: number | null; rawMean: number | null; correctedMean: number | null; quantiles: (number | null)[]; exceedance: (number | null)[] }[];
  anyTime: (number | null)[];
}

const num = (x: number, digits = 4) => (Number.isFinite(x) ? Math.round(x * 10 ** digits) / 10 ** digits : null);

/** A hindcast's stored issues in [fromMs, toMs), decoded with its horizon, levels and thresholds. */
export async function hindcastIssues(db: Db, jobId: string, r: { horizon: number; perIssue: PerIssueInfo; thresholds: { label: string; value: number }[] }, stepSeconds: number, fromMs?: number, toMs?: number): Promise<HindcastIssue[]> {
  const H = r.horizon;
  const nQ = r.perIssue.probabilities.length;
  const T = r.thresholds.length;
  const F = 3 + nQ + T;
  const stepMs = stepSeconds * 1000;
  return (await readHindcastIssues(db, jobId, fromMs, toMs)).map(({ issueTimeMs, values }) => ({
    issueTime: iso(issueTimeMs),
    leads: Array.from({ length: H }, (_, h) => {
      const o = h * F;
      return {
        leadTime: formatDurationSeconds((h + 1) * stepSeconds),
        validTime: iso(issueTimeMs + (h + 1) * stepMs),
        observed: num(values[o]),
        rawMean: num(values[o + 1]),
        correctedMean: num(values[o + 2]),
        quantiles: Array.from({ length: nQ }, (_, q) => num(values[o + 3 + q])),
        exceedance: Array.from({ length: T }, (_, t) => num(values[o + 3 + nQ + t])),
      };
    }),
    anyTime: Array.from({ length: T }, (_, t) => num(values[H * F + t])),
  }));
}
