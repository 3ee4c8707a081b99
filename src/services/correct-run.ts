// Use case: correct a posted run. Reads top to bottom: an earlier identical request answers from
// the store; else the active model version and the error archive for the run's horizon are chosen
// (corrected, else degraded on the raw archive), the run is checked against them, corrected in the
// worker pool (falling back to degraded when the model fails), shaped into the served view with
// the recent observations, and stored in one transaction.
import { createHash, randomUUID } from 'node:crypto';
import { archiveReach, chooseArchive, leadGrowthOf } from '../core/stochastic/archive-choice.ts';
import type { RequiredInputs, RunInput } from '../core/features/features.ts';
import { checkResidualSpec, requiredRunInputs, specForcings, type ResidualSpec } from '../core/features/model-inputs.ts';
import { DEFAULT_QUANTILE_PROBS } from '../core/stochastic/stochastic-stage.ts';
import type { Config } from '../config.ts';
import { listMembers, readObservations } from '../store/archive-repo.ts';
import type { Db, Queryable } from '../store/db.ts';
import { findRunByIdempotencyKey, findRunByKey, insertRun, type StoredRun } from '../store/forecasts-repo.ts';
import type { Gauge } from '../store/gauges-repo.ts';
import { loadWarmupSlice } from '../store/warmup-slice.ts';
import { fillWarmup, warmupGap, type WarmupSeries } from '../core/features/run-warmup.ts';
import { archiveBytes, getActiveModelVersion, latestRawArchiveInfo, modelParts, versionArchiveInfo, type ArchiveInfo } from '../store/models-repo.ts';
import { CorrectionError, PoolFullError, type ArchiveSource, type CorrectionPool, type CorrectionResult, type ModelSource } from '../workers/correction-pool.ts';
import { buildForecastView } from './forecast-view.ts';
import { decideUpdating, type UpdatingDecision } from './issue-updating.ts';
import { ratingAtIssue } from './rating.ts';
import { conflict, ErrorList, invalid, Problem, type FieldError } from './problem.ts';
import { checkTimes, isoUtc, knownForcingUnits } from './series-input.ts';
import { FLOAT32_MAX, flowLimit, forcingLimit, valueProblem } from './plausible-values.ts';
import { rfc3339Ms } from '../core/rfc3339.ts';
import { flowUnit, type FlowUnit } from '../core/flow-units.ts';
import { StageClock } from './stage-clock.ts';
import { recordInputFromView, storeRunRecord } from './verify-runs.ts';

/**
 * Stored with every run for verification: the quantiles at the midpoint levels (i − 0.5)/100,
 * which score as a 100-member ensemble (the CRPS of such a quantile ensemble approaches the
 * continuous one; properscoring's test of the Gaussian closed form uses the same levels).
 */
const PERCENTILES = Array.from({ length: 100 }, (_, i) => (i + 0.5) / 100);

/** A posted run after the wire schema (src/api/runs.ts) has applied its defaults; values still unchecked. */
export interface RunRequest {
  issueTime: string;
  source: string;
  unit: string;
  warmupSteps: number;
  members: { id: string; values: unknown[] }[];
  forcings?: Record<string, unknown[]>;
  issueObservation?: number | null;
  quantiles?: number[];
  trajectories?: number;
  seed?: number;
  seasonalWindowDays: number | null;
}

/**
 * A posted run whose shape the wire schema refused in places: the fields it could read, the others
 * absent. The checks that need only the readable fields still run, so one answer lists every problem.
 */
export type RunDraft = Partial<Omit<RunRequest, 'members'>> & { members?: { id?: string; values?: unknown[] }[] };

/** Where a run's body came from, for the answer (JSON, CSV or NetCDF). */
export interface RunForm {
  form: 'json' | 'csv' | 'netcdf';
}

/** Counters the use case feeds (the API's metrics registry). */
export interface RunMetrics {
  rejectedBusy: { inc(): void };
  degraded: { inc(labels: { reason: string }): void };
  runs: { inc(labels: { status: string }): void };
  stage: { observe(labels: { stage: string }, seconds: number): void };
}

/** What the caller sends back: a new run, or the stored answer to an earlier identical request. */
export type RunAnswer = { created: true; id: string; etag: string; output: string; stageMs: Record<string, number> } | { created: false; stored: StoredRun };

/** What the answer says about the run's warm-up: how much the run gave, how much the model reads, what came from the archive. */
export interface WarmupUsed {
  /** Values per member at or before issue time in the posted run. */
  stepsInRun: number;
  /** Values per member at or before issue time the residual model reads (0 when no model runs). */
  stepsNeeded: number;
  /** Series lengthened from the stored archive: the members' continuous simulations, and forcings. */
  fromArchive: { series: string; from: string; to: string; steps: number }[];
}

/**
 * The run lengthened from the archive so each member and each forcing the model reads holds what
 * the model needs at or before issue time (the members' archived continuous simulations and the
 * archived forcings: what a run's warm-up holds anyway); values missing in the run's own warm-up
 * are filled from the archive too. `extra` more steps are read where the archive has them
 * (issue-time updating corrects the member at the observation's time); only a value the model
 * itself needs and neither the run nor the archive has is an error, named by member and time.
 */
async function withArchiveWarmupFrom(
  db: Queryable,
  gauge: Gauge,
  spec: ResidualSpec,
  run: RunInput,
  memberIds: string[],
  memberPaths: string[],
  extra: number,
  errors: ErrorList,
): Promise<{ run: RunInput; used: WarmupUsed }> {
  const need = requiredRunInputs(spec);
  const stepsInRun = run.members.length ? run.members[0].length - run.nLeads : 0;
  const used: WarmupUsed = { stepsInRun, stepsNeeded: need.simStepsToIssue, fromArchive: [] };
  const widen = (n: number) => (n > 0 ? n + extra : 0);
  const want: RequiredInputs = { ...need, simStepsToIssue: widen(need.simStepsToIssue), forcings: need.forcings.map((f) => ({ name: f.name, stepsToIssue: widen(f.stepsToIssue) })) };
  const flat = (f: unknown): f is ArrayLike<number> => !(Array.isArray(f) && f.length > 0 && (Array.isArray(f[0]) || ArrayBuffer.isView(f[0])));
  // Series the model reads, with how many values at or before issue time it needs and may use.
  const series: (Omit<WarmupSeries, 'archived'> & { name: string; path: string; key: number | string })[] = [];
  run.members.forEach((m, i) => series.push({ name: `member ${memberIds[i]}'s simulated flow`, path: memberPaths[i], values: m, needed: need.simStepsToIssue, wanted: want.simStepsToIssue, key: i }));
  need.forcings.forEach((f, j) => {
    const given = run.forcings?.[f.name];
    if (given && flat(given)) series.push({ name: f.name, path: `body.forcings.${f.name}`, values: given, needed: f.stepsToIssue, wanted: want.forcings[j].stepsToIssue, key: f.name });
  });
  if (!series.some((x) => warmupGap({ ...x, archived: null }, run.nLeads))) return { run, used };
  const steps = Math.max(1, ...series.map((x) => x.wanted));
  const slice = await loadWarmupSlice(db, gauge.id, gauge.stepSeconds, run.issueTime, steps, memberIds, specForcings(spec));
  const stepMs = gauge.stepSeconds * 1000;
  const at = (back: number) => isoUtc(run.issueTime - back * stepMs);
  const taken = new Map<number | string, number[]>();
  const lengthened = series.map((x) => {
    const archived = typeof x.key === 'number' ? slice.members[x.key] : (slice.forcings[x.key] ?? null);
    const filled = fillWarmup({ ...x, archived }, run.nLeads, slice.steps);
    if (filled.missing.length) {
      errors.add(x.path, `the model reads ${x.needed} values of ${x.name} up to issue time; neither the run nor the stored archive has one at ${filled.missing.reverse().map(at).join(', ')}; post them to the archive or in the run's warm-up`);
    }
    taken.set(x.key, filled.taken);
    return filled.values;
  });
  const members = run.members.map((_, i) => lengthened[i]);
  const forcings: NonNullable<RunInput['forcings']> = { ...(run.forcings ?? {}) };
  series.slice(run.members.length).forEach((x, j) => (forcings[x.key as string] = lengthened[run.members.length + j]));
  // What the answer says: one line for the members when they took the same times, else one per member.
  const span = (series: string, backs: number[]) => {
    if (backs.length) used.fromArchive.push({ series, from: at(Math.max(...backs)), to: at(Math.min(...backs)), steps: backs.length });
  };
  const memberTakes = run.members.map((_, i) => taken.get(i) ?? []);
  const same = memberTakes.every((b) => b.join() === memberTakes[0].join());
  if (same) span('simulated flow of each member', memberTakes[0] ?? []);
  else memberTakes.forEach((b, i) => span(`simulated flow of member ${memberIds[i]}`, b));
  for (const x of series.slice(run.members.length)) span(x.name, taken.get(x.key) ?? []);
  return { run: { ...run, members, forcings }, used };
}

/**
 * JSON.stringify({ ...body, ...extra }) from bodyJson = JSON.stringify(body), without serialising
 * the body (a run's ~100 KB of numbers) a second time: the same text, as the extra keys are new
 * and come last. Falls back to serialising when a key of extra is already in the body.
 */
export function jsonWithFields(bodyJson: string, body: object, extra: Record<string, unknown>): string {
  const tail = JSON.stringify(extra);
  if (tail === '{}') return bodyJson;
  if (bodyJson === '{}' || Object.keys(extra).some((k) => Object.hasOwn(body, k))) return JSON.stringify({ ...body, ...extra });
  return `${bodyJson.slice(0, -1)},${tail.slice(1)}`;
}

/**
 * The values the archive added in front of the run's series, stored with the run so it can be
 * reproduced even if the archive changes later (null when nothing was added).
 */
function archiveWarmupValues(given: RunInput, run: RunInput, memberIds: string[]) {
  const front = (before: ArrayLike<number>, after: ArrayLike<number>) => Array.from({ length: after.length - before.length }, (_, j) => (Number.isFinite(after[j]) ? after[j] : null));
  const members: Record<string, (number | null)[]> = {};
  run.members.forEach((m, i) => {
    if (m.length > given.members[i].length) members[memberIds[i]] = front(given.members[i], m);
  });
  const forcings: Record<string, (number | null)[]> = {};
  for (const [name, after] of Object.entries(run.forcings ?? {})) {
    const before = given.forcings?.[name];
    if (before && after.length > before.length && !Array.isArray(after[0])) forcings[name] = front(before as ArrayLike<number>, after as ArrayLike<number>);
  }
  return Object.keys(members).length || Object.keys(forcings).length ? { members, forcings } : null;
}

/** A path into the lengthened run (`members[2].values[9]`) as the index of the posted body's value. */
function bodyIndex(path: string, given: RunInput, run: RunInput): string {
  const m = /^members\[(\d+)\]\.values\[(\d+)\]$/.exec(path);
  if (!m) return path;
  const i = +m[1];
  const k = +m[2] - ((run.members[i]?.length ?? 0) - (given.members[i]?.length ?? 0));
  return k >= 0 ? `members[${i}].values[${k}]` : `members[${i}].values (a value taken from the archive, ${-k} before the run's first)`;
}

/** Default seed: a hash of the run's natural key, so reposting the same run reproduces it. */
function defaultSeed(gaugeId: string, issueTime: string, source: string): number {
  return createHash('sha256').update(`${gaugeId}|${issueTime}|${source}`).digest().readUInt32BE(0) >>> 1;
}

/**
 * Checks a run's values against the gauge and its archives, adding every problem to `errors`.
 * Fields the wire schema refused are absent and their checks are skipped (already reported).
 * Flows are converted to m³/s; forcings may hold the lead times only (the archive gives the rest).
 */
function checkRun(body: RunDraft, gauge: Gauge, known: Set<string>, horizonLimit: number, maxTrajectories: number, errors: ErrorList): { run: RunInput; unit: FlowUnit | null } {
  let unit: FlowUnit | null = null;
  if (body.unit !== undefined) {
    unit = flowUnit(body.unit);
    if (!unit) errors.add('body.unit', `not a flow unit the service takes: ${JSON.stringify(body.unit)}; use m3/s (or m3 s-1), l/s (L s-1) or ft3/s (ft3 s-1, cfs)`);
  }
  const factor = unit?.factor ?? 1;
  const issueMs = body.issueTime === undefined ? NaN : checkTimes([body.issueTime], gauge.stepSeconds, () => 'body.issueTime', errors)[0];
  const warmupSteps = body.warmupSteps ?? 0;
  const given = body.members ?? [];
  const length = given[0]?.values?.length ?? 0;
  const nLeads = length - warmupSteps;
  if (given[0]?.values) {
    if (nLeads < 1) errors.add('body.warmupSteps', `is ${warmupSteps} but members[0] has only ${length} values; at least one lead time is needed`);
    if (nLeads > horizonLimit) errors.add('body.members[0].values', `has ${nLeads} lead times; the error archive covers at most ${horizonLimit}`);
  }
  if (body.trajectories !== undefined && body.trajectories > maxTrajectories) errors.add('body.trajectories', `at most ${maxTrajectories}`);
  const seen = new Set<string>();
  const flow = flowLimit(gauge);
  const members = given.map((m, i) => {
    if (m.id !== undefined) {
      if (!known.has(m.id)) errors.add(`body.members[${i}].id`, `unknown member ${m.id}; the gauge's members are those in its simulation archive`);
      if (seen.has(m.id)) errors.add(`body.members[${i}].id`, `member ${m.id} appears twice`);
      seen.add(m.id);
    }
    const values = m.values ?? [];
    if (m.values && values.length !== length) errors.add(`body.members[${i}].values`, `has ${values.length} values but members[0] has ${length}`);
    const out = new Float64Array(values.length);
    values.forEach((v, k) => {
      const atLead = k >= warmupSteps;
      if (v === null && !atLead) out[k] = NaN;
      else if (typeof v !== 'number' || !Number.isFinite(v)) errors.add(`body.members[${i}].values[${k}]`, atLead ? `must be a finite flow (lead times cannot be missing), got ${JSON.stringify(v)}` : `must be a finite number or null, got ${JSON.stringify(v)}`);
      else {
        // Plausible for the gauge (src/services/plausible-values.ts), in m³/s after the unit.
        const problem = valueProblem(v * factor, flow);
        if (problem) errors.add(`body.members[${i}].values[${k}]`, problem);
        else out[k] = v * factor;
      }
    });
    return out;
  });
  const forcings: Record<string, Float64Array> = {};
  for (const [name, values] of Object.entries(body.forcings ?? {})) {
    // A forcing ends at the last lead time: the lead times alone, or warm-up and lead times.
    if (nLeads >= 1 && values.length < nLeads) errors.add(`body.forcings.${name}`, `has ${values.length} values; give at least one per lead time (${nLeads}), optionally after the warm-up`);
    forcings[name] = Float64Array.from(values, (v, k) => {
      if (v === null) return NaN;
      if (typeof v !== 'number' || !Number.isFinite(v)) {
        errors.add(`body.forcings.${name}[${k}]`, `must be a finite number or null, got ${JSON.stringify(v)}`);
        return NaN;
      }
      const problem = valueProblem(v, forcingLimit(gauge, name, knownForcingUnits[name]?.unit ?? ''));
      if (problem) errors.add(`body.forcings.${name}[${k}]`, problem);
      return v;
    });
  }
  const observation = body.issueObservation === undefined || body.issueObservation === null ? null : body.issueObservation * factor;
  if (observation !== null) {
    const problem = valueProblem(observation, flow);
    if (problem) errors.add('body.issueObservation', problem);
  }
  return { run: { issueTime: issueMs, nLeads, members, forcings, issueObservation: observation }, unit };
}

/** What the answer says about updating: what was used, or why not (degraded runs are never updated). */
function updatingAnswer(status: 'corrected' | 'degraded', u: UpdatingDecision | null, degradedReason: string | null) {
  if (!u) return undefined;
  if (status === 'degraded') return { status: 'off' as const, reason: `not updated: ${degradedReason}`, observation: null, method: null };
  return u.answer;
}

/** The stored answer of an earlier identical request, or a conflict when the request differs. */
function replay(stored: StoredRun, requestHash: string, what: string, path?: string): StoredRun {
  if (stored.requestHash !== requestHash) {
    const detail = `${what} was already used for a run with different content (run ${stored.id}); nothing was changed`;
    throw conflict(detail, path ? [{ path, message: 'already used with a different body; send a new key for a new request' }] : []);
  }
  return stored;
}


/**
 * Corrects posted runs for one service instance. Model parts are immutable once stored, so they
 * are cached by version id for the instance's life.
 */
export class RunCorrection {
  private readonly partCache = new Map<string, Promise<{ parts: Uint8Array[]; spec: unknown }>>();

  constructor(private readonly deps: { db: Db; config: Config; pool: CorrectionPool; metrics: RunMetrics }) {}

  /**
   * Corrects and stores one run, or answers with the stored one for a repeated request.
   * `log` gets a warning when the residual model fails; `started` (performance.now()) times the answer.
   */
  async correct(
    gauge: Gauge,
    draft: RunDraft,
    shapeErrors: FieldError[],
    idempotencyKey: string | null,
    log: { warn: (o: object, msg: string) => void },
    started = performance.now(),
    form: RunForm['form'] = 'json',
  ): Promise<RunAnswer> {
    const { db, config, pool, metrics } = this.deps;
    const errors = new ErrorList();
    for (const e of shapeErrors) errors.add(e.path, e.message);
    if (idempotencyKey !== null && !/^[\x21-\x7e]{1,200}$/.test(idempotencyKey)) errors.add('headers.idempotency-key', 'must be 1–200 visible ASCII characters');
    // Where the milliseconds go (the Server-Timing header; bench/correction.ts prints them).
    const clock = new StageClock(started);
    const draftJson = JSON.stringify(draft);
    const requestHash = createHash('sha256').update(draftJson).digest('hex');
    clock.lap('hash');
    // An earlier identical request answers from the store (only a well-formed body can be one).
    if (!errors.items.length) {
      const body = draft as RunRequest;
      if (idempotencyKey) {
        const stored = await findRunByIdempotencyKey(db, gauge.id, idempotencyKey);
        if (stored) return { created: false, stored: replay(stored, requestHash, `this Idempotency-Key on gauge ${gauge.id}`, 'headers.idempotency-key') };
      }
      const byKey = await findRunByKey(db, gauge.id, rfc3339Ms(body.issueTime), body.source);
      if (byKey) return { created: false, stored: replay(byKey, requestHash, `issue time ${body.issueTime} from source ${body.source}`) };
    }

    // Which correction: the active model with its archive, else degraded on the raw archive.
    // Each prefers its per-lead archive (errors of past runs at each lead time) when the run's
    // lead times fit within it, else the lead-free one (continuous simulations).
    const asked = Math.max(1, (draft.members?.[0]?.values?.length ?? 1) - (draft.warmupSteps ?? 0));
    const active = await getActiveModelVersion(db, gauge.id);
    // Independent look-ups, sent together (the pg driver runs them on separate connections).
    const [correctedPerLead, correctedLeadFree, rawPerLead, rawLeadFree, memberIds] = await Promise.all([
      active ? versionArchiveInfo(db, active.id, 'corrected', 'per-lead') : null,
      active ? versionArchiveInfo(db, active.id, 'corrected') : null,
      latestRawArchiveInfo(db, gauge.id, 'per-lead'),
      latestRawArchiveInfo(db, gauge.id),
      listMembers(db, gauge.id),
    ]);
    const correctedChoice = active ? [correctedPerLead, correctedLeadFree] : null;
    const rawChoice = [rawPerLead, rawLeadFree];
    const correctedArchive = correctedChoice ? chooseArchive(correctedChoice[0], correctedChoice[1], asked, config.PER_LEAD_MIN_RUNS) : null;
    const rawArchive = chooseArchive(rawChoice[0], rawChoice[1], asked, config.PER_LEAD_MIN_RUNS);
    if (!correctedArchive && !rawArchive) {
      // A bad run is refused as such even where no correction is possible.
      // (Membership and horizon need an archive: only the run's own values are checked here.)
      const given = new Set((draft.members ?? []).map((m) => m.id).filter((id): id is string => id !== undefined));
      checkRun(draft, gauge, given, Infinity, config.MAX_TRAJECTORIES, errors);
      errors.throwIfAny();
      throw new Problem(409, 'no-correction-available', 'No correction available', `gauge ${gauge.id} has no active residual model and no raw error archive; fit a model (POST /gauges/${gauge.id}/models/fit) or build the raw archive (POST /gauges/${gauge.id}/raw-archive)`);
    }
    // Both the corrected path and its degraded fallback must be able to serve the run; each
    // reaches as far as the longer of its two archives.
    const reaches: number[] = [];
    if (correctedArchive) reaches.push(Math.max(...correctedChoice!.map(archiveReach)));
    if (rawArchive) reaches.push(Math.max(...rawChoice.map(archiveReach)));
    const horizonLimit = Math.min(...reaches);
    const known = new Set(memberIds);
    clock.lap('reads');
    const checked = checkRun(draft, gauge, known, horizonLimit, config.MAX_TRAJECTORIES, errors);
    clock.lap('validate');
    const given = checked.run;
    // The model's inputs before issue time that the run does not carry come from the archive
    // (all members and forcings at once, so every missing time is named in one answer).
    let run = given;
    let warmup: WarmupUsed = { stepsInRun: Math.max(0, (given.members[0]?.length ?? 0) - given.nLeads), stepsNeeded: 0, fromArchive: [] };
    const spec = active && correctedArchive ? checkResidualSpec(active.featureSpec) : null;
    if (spec) {
      const need = requiredRunInputs(spec);
      for (const f of need.forcings) {
        if (!(f.name in (draft.forcings ?? {}))) errors.add(`body.forcings.${f.name}`, `model version ${active!.id} reads forecast ${f.name}: give one value per lead time (earlier values come from the archive)`);
      }
      const ids = (draft.members ?? []).map((m) => m.id);
      const readable = Number.isFinite(given.issueTime) && given.nLeads >= 1 && ids.every((id) => id !== undefined && known.has(id));
      if (readable) {
        // Issue-time updating corrects the member at the observation's time: read that far back too.
        const extra = active!.updating ? gauge.updatingMaxAgeSteps + 1 : 0;
        const paths = ids.map((_, i) => `body.members[${i}].values`);
        ({ run, used: warmup } = await withArchiveWarmupFrom(db, gauge, spec, given, ids as string[], paths, extra, errors));
      } else warmup.stepsNeeded = need.simStepsToIssue;
    }
    errors.throwIfAny();
    const body = draft as RunRequest;
    // Issue-time updating: the latest observation at or before issue time (the run's own wins).
    const updating: UpdatingDecision | null =
      active && correctedArchive ? await decideUpdating(db, gauge, active, run, run.members[0].length - run.nLeads, run.issueObservation) : null;

    // Thresholds given as water levels become flows through the rating curve in force at issue time.
    const rating = await ratingAtIssue(db, gauge, run.issueTime);
    clock.lap('reads');
    const probs = body.quantiles ?? [...DEFAULT_QUANTILE_PROBS];
    const seed = body.seed ?? defaultSeed(gauge.id, isoUtc(run.issueTime), body.source);
    const options = {
      stepSeconds: gauge.stepSeconds,
      seed,
      nDraws: body.trajectories ?? 1000,
      probs: [...probs, ...PERCENTILES],
      thresholds: rating.thresholds.map((t) => t.value),
      seasonalWindowDays: body.seasonalWindowDays,
    };
    const archiveSource = (a: ArchiveInfo): ArchiveSource => ({ archiveId: a.id, load: () => archiveBytes(db, a.id) });
    const modelSource = (versionId: string, spec: unknown): ModelSource => ({
      versionId,
      load: () => {
        let p = this.partCache.get(versionId);
        if (!p) this.partCache.set(versionId, (p = modelParts(db, versionId).then((parts) => ({ parts, spec }))));
        return p;
      },
    });

    // The recent observations shown with the answer, read while the worker corrects.
    const stepMs = gauge.stepSeconds * 1000;
    const recentRead = readObservations(db, gauge.id, { fromMs: run.issueTime - 9 * stepMs, toMs: run.issueTime + 1 });
    recentRead.catch(() => {}); // awaited below; a refused run must not leave it unhandled
    let result: CorrectionResult;
    let used: ArchiveInfo;
    let status: 'corrected' | 'degraded' = 'corrected';
    let degradedReason: string | null = null;
    try {
      if (active && correctedArchive) {
        try {
          used = updating?.archive ?? correctedArchive;
          result = await pool.correct(modelSource(active.id, active.featureSpec), archiveSource(used), run, { ...options, updating: updating?.correct ?? null });
        } catch (err) {
          if (err instanceof CorrectionError && err.path) {
            throw invalid([{ path: `body.${bodyIndex(err.path, given, run)}`, message: `${err.message} (needed by model version ${active.id}'s feature spec)` }]);
          }
          if (err instanceof PoolFullError || !rawArchive) throw err;
          status = 'degraded';
          degradedReason = `the residual model (version ${active.id}) failed: ${(err as Error).message}`;
          log.warn({ gauge: gauge.id, err: (err as Error).message }, 'residual model failed; serving degraded');
          used = rawArchive;
          result = await pool.correct(null, archiveSource(rawArchive), run, options);
        }
      } else {
        status = 'degraded';
        degradedReason = active
          ? `model version ${active.id} has no error archive for this run: the stochastic stage ran on the raw members with the raw error archive`
          : `no active residual model for gauge ${gauge.id}: the stochastic stage ran on the raw members with the raw error archive`;
        used = rawArchive!;
        result = await pool.correct(null, archiveSource(rawArchive!), run, options);
      }
    } catch (err) {
      if (err instanceof PoolFullError) {
        metrics.rejectedBusy.inc();
        throw new Problem(503, 'busy', 'Busy', 'the correction queue is full; retry shortly', [], { 'retry-after': '2' });
      }
      throw err;
    }
    if (status === 'degraded') metrics.degraded.inc({ reason: active ? 'model-failed' : 'no-model' });
    // The pool's time less the worker's own parts: waiting for a worker and passing messages.
    const rt = result.timings;
    clock.lap('worker');
    clock.add('worker', -(rt.featuresMs + rt.inferenceMs + rt.stochasticMs));
    clock.add('features', rt.featuresMs);
    clock.add('inference', rt.inferenceMs);
    clock.add('stage-setup', rt.stage.setupMs);
    clock.add('knn', rt.stage.knnMs);
    clock.add('sampling', rt.stage.samplingMs);
    clock.add('shuffle', rt.stage.shuffleMs);
    clock.add('summary', rt.stage.summaryMs);

    const nQ = probs.length;
    const nAll = options.probs.length;
    const H = run.nLeads;
    const quantiles = new Float64Array(H * nQ);
    const percentiles: number[][] = [];
    for (let k = 0; k < H; k++) {
      for (let q = 0; q < nQ; q++) quantiles[k * nQ + q] = result.quantiles[k * nAll + q];
      percentiles.push(Array.from({ length: PERCENTILES.length }, (_, j) => Math.round(result.quantiles[k * nAll + nQ + j] * 1e4) / 1e4));
    }
    // Last guard of "no non-finite value is ever stored": the quantiles go to float32 bytes and the
    // answer; values within the plausible limits cannot get here, so this is a refusal, not a repair.
    const storable = (v: number) => Number.isFinite(v) && Math.abs(v) <= FLOAT32_MAX;
    if (!quantiles.every(storable) || !percentiles.every((row) => row.every(storable)) || !result.exceedance.every(Number.isFinite)) {
      throw invalid([{ path: 'body.members', message: 'the correction of these values gave quantiles that cannot be stored (not finite or beyond float32); nothing was stored' }]);
    }
    clock.lap('serialise');
    const recentRows = await recentRead;
    clock.lap('reads');
    const id = randomUUID();
    const createdAt = new Date().toISOString();
    const raw = new Float64Array(run.members.length * H);
    run.members.forEach((m, i) => raw.set(Float64Array.from({ length: H }, (_, k) => m[m.length - H + k]), i * H));
    const timings = { featuresMs: rt.featuresMs, inferenceMs: rt.inferenceMs, stochasticMs: rt.stochasticMs, totalMs: 0 };
    const view = buildForecastView({
      id,
      gauge: { ...gauge, thresholds: rating.thresholds },
      ratingCurve: rating.curve,
      issueTimeMs: run.issueTime,
      createdAt,
      source: body.source,
      status,
      degradedReason,
      modelVersion: status === 'corrected' && active ? { id: active.id, label: active.label } : null,
      updating: updatingAnswer(status, updating, degradedReason),
      errorArchive: { id: used!.id, kind: used!.kind, leadMode: used!.leadMode, leadTimes: archiveReach(used!), cases: Number(used!.summary.cases ?? 0), templates: Number(used!.summary.templates ?? 0), leadGrowth: leadGrowthOf(used!, asked) },
      seed,
      nDraws: result.nDraws,
      attentionLevel: config.ATTENTION_LEVEL,
      probs,
      nLeads: H,
      memberIds: body.members.map((m) => m.id),
      input: {
        form,
        unit: checked.unit?.name ?? 'm3/s',
        conversion: checked.unit && checked.unit.factor !== 1 ? { from: checked.unit.name, to: 'm3/s', factor: checked.unit.factor, source: checked.unit.source! } : null,
        warmup,
      },
      raw,
      corrected: status === 'corrected' ? result.corrected : null,
      quantiles,
      exceedance: result.exceedance,
      anyTime: result.exceedanceAnyTime,
      firstLikelyLead: result.firstLikelyLead,
      recent: { times: recentRows.map((r) => isoUtc(r.t)), observed: recentRows.map((r) => r.value) },
      timings,
    });
    timings.totalMs = Math.round((performance.now() - started) * 100) / 100;
    for (const k of ['featuresMs', 'inferenceMs', 'stochasticMs'] as const) timings[k] = Math.round(timings[k] * 100) / 100;
    const output = JSON.stringify(view);
    const etag = `"${createHash('sha256').update(output).digest('base64url').slice(0, 27)}"`;
    const summary = view.thresholds.map((t) => ({ label: t.label, value: t.value, maxExceedance: Math.max(0, ...t.exceedance), anyTime: t.anyTime, attention: t.attention }));
    clock.lap('serialise');
    try {
      await insertRun(db, {
          id,
          gaugeId: gauge.id,
          issueTimeMs: run.issueTime,
          source: body.source,
          requestHash,
          idempotencyKey,
          status,
          modelVersionId: status === 'corrected' ? (active?.id ?? null) : null,
          seed,
          input: null,
          inputJson: jsonWithFields(draftJson, body, { form, archiveWarmup: archiveWarmupValues(given, run, body.members.map((m) => m.id)) }),
          output,
          etag,
          summary,
          percentiles,
          issueObservation:
            updating?.stored && (status === 'corrected' || updating.stored.source === 'run')
              ? updating.stored
              : run.issueObservation != null
                ? { timeMs: run.issueTime, value: run.issueObservation, source: 'run' }
                : null,
      });
    } catch (err) {
      // A concurrent identical post won the race: answer with what it stored.
      const stored = (idempotencyKey && (await findRunByIdempotencyKey(db, gauge.id, idempotencyKey))) || (await findRunByKey(db, gauge.id, run.issueTime, body.source));
      if (stored) return { created: false, stored: replay(stored, requestHash, 'this run') };
      throw err;
    }
    // The run's verification record, so verifying stored runs never re-reads this answer. Not
    // part of the run's statement: if it fails, the first verification that reads the run builds it.
    await storeRunRecord(db, gauge, id, recordInputFromView(view, percentiles)).catch((err: Error) => {
      log.warn({ gauge: gauge.id, run: id, err: err.message }, 'run verification record not stored; the next verification builds it');
    });
    clock.lap('writes');
    metrics.runs.inc({ status });
    for (const [stage, ms] of Object.entries({ features: timings.featuresMs, inference: timings.inferenceMs, stochastic: timings.stochasticMs, total: timings.totalMs })) {
      metrics.stage.observe({ stage }, ms / 1000);
    }
    return { created: true, id, etag, output, stageMs: clock.ms };
  }
}
