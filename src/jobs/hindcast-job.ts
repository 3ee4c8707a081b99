import { checkFeatureSpec, requiredInputs } from '../core/features.ts';
import { formatDurationSeconds } from '../core/iso-duration.ts';
import type { ComparisonReport, SourceName } from '../core/verification/index.ts';
import { readReforecasts } from '../store/archive-repo.ts';
import { loadArchiveSeries } from '../store/archive-series.ts';
import { saveDriftReference } from '../store/gauge-status-repo.ts';
import { getGauge } from '../store/gauges-repo.ts';
import { getModelVersion, modelParts, versionArchive } from '../store/models-repo.ts';
import { correctedArchiveFor, reforecastIssueTimes } from '../store/verification-repo.ts';
import { refreshGaugeStatus } from './drift-refresh.ts';
import type { HindcastOutput, HindcastSettings } from './hindcast-compute.ts';
import { runCompute } from './run-compute.ts';
import type { JobHandler } from './runner.ts';

/** Parameters of a hindcast job, as accepted by the API (already validated there). */
export interface HindcastJobParams {
  /** 'auto' (reference jobs): reforecast when the period holds at least 20 stored runs, else simulation. */
  mode: 'simulation' | 'reforecast' | 'auto';
  versionId: string;
  /** Issue-time window [from, to); null = the version's validation period. */
  from: string | null;
  to: string | null;
  /** Lead times (steps); null = 10 (simulation) or the longest stored (reforecast), within the archive's reach. */
  horizon: number | null;
  /** Simulation mode: one issue every n steps. */
  everySteps: number;
  trajectories: number;
  seed: number;
  seasonalWindowDays: number | null;
  /** 1-based lead steps kept by the verification; null = open. */
  minLead: number | null;
  maxLead: number | null;
  sizeStudy: { sources: SourceName[]; sizes: number[]; repeats: number; caseFraction: number | null };
  /** 'drift-reference' when the drift watch started it to measure the version's validation level. */
  purpose: 'request' | 'drift-reference';
  /** Store the stochastic stage's coverage and CRPS as the version's drift-watch level (refused when the period overlaps calibration). */
  setDriftLevel: boolean;
}

export const REFERENCE_MIN_REFORECASTS = 20;

interface Period {
  fromMs: number;
  toMs: number;
}

const iso = (ms: number) => new Date(ms).toISOString().replace('.000Z', 'Z');

/** A version's stored period ({from, to} RFC 3339), or null. */
export function storedPeriod(p: unknown): Period | null {
  const v = p as { from?: unknown; to?: unknown } | null | undefined;
  if (!v || typeof v.from !== 'string' || typeof v.to !== 'string') return null;
  const fromMs = Date.parse(v.from);
  const toMs = Date.parse(v.to);
  return Number.isFinite(fromMs) && Number.isFinite(toMs) ? { fromMs, toMs } : null;
}

/** byLead entries also name their lead time as an ISO 8601 duration (lead index 0 = one step). */
export function withLeadTimes(report: ComparisonReport, stepSeconds: number): ComparisonReport {
  for (const s of [report.raw, report.corrected, report.stochastic]) {
    if (!s) continue;
    for (const l of s.byLead) (l as typeof l & { leadTime: string }).leadTime = formatDurationSeconds((l.lead + 1) * stepSeconds);
  }
  return report;
}

/** Issues whose valid times (issue + 1 … H steps) fall at least partly inside a period. */
function overlapping(issueTimes: number[], stepMs: number, H: number, p: Period | null): number {
  if (!p) return 0;
  let n = 0;
  for (const t of issueTimes) if (t + stepMs < p.toMs && t + H * stepMs >= p.fromMs) n++;
  return n;
}

export const hindcastJob: JobHandler = async (job, { db, progress, signal }) => {
  const p = job.params as unknown as HindcastJobParams;
  const gauge = await getGauge(db, job.gaugeId!);
  if (!gauge) throw new Error(`gauge ${job.gaugeId} no longer exists`);
  const version = await getModelVersion(db, gauge.id, p.versionId);
  if (!version) throw new Error(`model version ${p.versionId} of gauge ${gauge.id} no longer exists`);
  const reach = (await correctedArchiveFor(db, version.id, 1)).maxReach;
  if (!reach) throw new Error(`model version ${version.id} has no corrected-member error archive`);
  const stepMs = gauge.stepSeconds * 1000;
  const calibration = storedPeriod(version.periods.calibration);
  const validation = storedPeriod(version.periods.validation);
  const fromMs = p.from ? Date.parse(p.from) : validation?.fromMs;
  const toMs = p.to ? Date.parse(p.to) : validation?.toMs;
  if (fromMs === undefined || toMs === undefined) throw new Error(`no period given and model version ${version.id} records no validation period`);
  await progress('loading the archive', 1);

  let mode: 'simulation' | 'reforecast' = p.mode === 'auto' ? 'simulation' : p.mode;
  if (p.mode === 'auto' && (await reforecastIssueTimes(db, gauge.id, fromMs, toMs)).length >= REFERENCE_MIN_REFORECASTS) mode = 'reforecast';
  const spec = checkFeatureSpec(version.featureSpec);
  const need = requiredInputs(spec);
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
  };
  // A version with an issue-time updater is also hindcast with updating, when its archive reaches H.
  const updArchive = version.updating ? await versionArchive(db, version.id, 'corrected', 'updating') : null;
  const updating = version.updating && updArchive && Number(updArchive.summary.nLeads ?? 0) >= H ? { model: version.updating, archive: updArchive.bytes } : null;
  await progress('starting the compute worker', 3);
  const handle = runCompute<HindcastOutput>({ kind: 'hindcast', input: { series, issueIndex, reforecast, model: { spec: version.featureSpec, parts: await modelParts(db, version.id) }, archive: archive.bytes, settings, updating } }, (pr) => {
    void progress(pr.stage, 3 + pr.percent * 0.95);
  });
  if (signal.aborted) handle.cancel();
  signal.addEventListener('abort', () => handle.cancel());
  const out = await handle.result;
  await progress('storing the result', 99);

  const used = out.issues.used;
  const usedTimes = Array.from(out.issues.usedIndex, (i) => t0 + i * stepMs);
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
    updating: out.updating
      ? { ...out.updating, note: `${out.updating.note} Updated on the observation at each issue time.` }
      : { status: 'not run', reason: version.updating ? `the updated members' error archive does not reach ${H} lead times` : `model version ${version.id} has no issue-time updater` },
    driftReference,
    timings: Object.fromEntries(Object.entries(out.timings).map(([k, v]) => [k, Math.round(v)])),
  };
};
