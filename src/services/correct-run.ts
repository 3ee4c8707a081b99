// Use case: correct a posted run. Reads top to bottom: an earlier identical request answers from
// the store; else the active model version and the error archive for the run's horizon are chosen
// (corrected, else degraded on the raw archive), the run is checked against them, corrected in the
// worker pool (falling back to degraded when the model fails), shaped into the served view with
// the recent observations, and stored in one transaction.
import { createHash, randomUUID } from 'node:crypto';
import { archiveReach, chooseArchive, leadGrowthOf } from '../core/stochastic/archive-choice.ts';
import type { RunInput } from '../core/features/features.ts';
import { checkResidualSpec, isSequenceSpec, requiredRunInputs, specForcings } from '../core/features/model-inputs.ts';
import { warmupShortfall, withArchiveWarmup } from '../core/features/run-warmup.ts';
import { DEFAULT_QUANTILE_PROBS } from '../core/stochastic/stochastic-stage.ts';
import type { Config } from '../config.ts';
import { listMembers, readObservations } from '../store/archive-repo.ts';
import type { Db, Queryable } from '../store/db.ts';
import { findRunByIdempotencyKey, findRunByKey, insertRun, type StoredRun } from '../store/forecasts-repo.ts';
import type { Gauge } from '../store/gauges-repo.ts';
import { loadWarmupSlice } from '../store/warmup-slice.ts';
import { archiveBytes, getActiveModelVersion, latestRawArchiveInfo, modelParts, versionArchiveInfo, type ArchiveInfo } from '../store/models-repo.ts';
import { CorrectionError, PoolFullError, type ArchiveSource, type CorrectionPool, type CorrectionResult, type ModelSource } from '../workers/correction-pool.ts';
import { buildForecastView } from './forecast-view.ts';
import { decideUpdating, type UpdatingDecision } from './issue-updating.ts';
import { ratingAtIssue } from './rating.ts';
import { conflict, ErrorList, invalid, Problem } from './problem.ts';
import { FLOAT32_MAX, flowLimit, forcingLimit, valueProblem } from './plausible-values.ts';
import { checkFlowUnit, checkTimes, checkValues, isoUtc, knownForcingUnits } from './series-input.ts';

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

/** Counters the use case feeds (the API's metrics registry). */
export interface RunMetrics {
  rejectedBusy: { inc(): void };
  degraded: { inc(labels: { reason: string }): void };
  runs: { inc(labels: { status: string }): void };
  stage: { observe(labels: { stage: string }, seconds: number): void };
}

/** What the caller sends back: a new run, or the stored answer to an earlier identical request. */
export type RunAnswer = { created: true; id: string; etag: string; output: string } | { created: false; stored: StoredRun };

/**
 * The run lengthened from the archive when the model is a sequence model whose window reaches
 * before the run's warm-up: the missing early steps are the members' archived continuous
 * simulations and the archived forcings (what a run's warm-up holds anyway). Other runs and
 * flat models pass as they are.
 */
async function withWindowWarmup(db: Queryable, gauge: Gauge, featureSpec: unknown, run: RunInput, memberIds: string[]): Promise<RunInput> {
  const spec = checkResidualSpec(featureSpec);
  if (!isSequenceSpec(spec)) return run;
  const need = requiredRunInputs(spec);
  if (warmupShortfall(run, need) === 0) return run;
  const steps = Math.max(need.simStepsToIssue, ...need.forcings.map((f) => f.stepsToIssue));
  const longer = withArchiveWarmup(run, need, await loadWarmupSlice(db, gauge.id, gauge.stepSeconds, run.issueTime, steps, memberIds, specForcings(spec)));
  // Name the member whose early steps the archive cannot give, rather than an index in the lengthened series.
  const stepMs = gauge.stepSeconds * 1000;
  longer.members.forEach((m, i) => {
    const added = m.length - run.members[i].length;
    for (let j = 0; j < added; j++) {
      if (Number.isFinite(m[j])) continue;
      const at = isoUtc(run.issueTime - (m.length - run.nLeads - 1 - j) * stepMs);
      throw invalid([{ path: `body.members[${i}].values`, message: `the model's ${spec.window}-step window needs ${need.simStepsToIssue} values up to issue time; the run gives ${run.members[i].length - run.nLeads} and the archive has no simulated value of member ${memberIds[i]} at ${at}` }]);
    }
  });
  return longer;
}

/** Default seed: a hash of the run's natural key, so reposting the same run reproduces it. */
function defaultSeed(gaugeId: string, issueTime: string, source: string): number {
  return createHash('sha256').update(`${gaugeId}|${issueTime}|${source}`).digest().readUInt32BE(0) >>> 1;
}

/**
 * The run's own values, checked before anything is looked up: times, unit, lengths, and every
 * value finite and plausible for the gauge (src/services/plausible-values.ts).
 */
function checkRunValues(body: RunRequest, gauge: Gauge, errors: ErrorList): { issueMs: number; members: Float64Array[]; forcings: Record<string, Float64Array> } {
  checkFlowUnit(body.unit, 'body.unit', errors);
  const issueMs = checkTimes([body.issueTime], gauge.stepSeconds, () => 'body.issueTime', errors)[0];
  const length = body.members[0].values.length;
  const flow = flowLimit(gauge);
  const members = body.members.map((m, i) => {
    if (m.values.length !== length) errors.add(`body.members[${i}].values`, `has ${m.values.length} values but members[0] has ${length}`);
    const out = new Float64Array(m.values.length);
    m.values.forEach((v, k) => {
      const atLead = k >= body.warmupSteps;
      if (v === null && !atLead) out[k] = NaN;
      else if (typeof v !== 'number' || !Number.isFinite(v)) errors.add(`body.members[${i}].values[${k}]`, atLead ? `must be a finite flow (lead times cannot be missing), got ${JSON.stringify(v)}` : `must be a finite number or null, got ${JSON.stringify(v)}`);
      else {
        const problem = valueProblem(v, flow);
        if (problem) errors.add(`body.members[${i}].values[${k}]`, problem);
        else out[k] = v;
      }
    });
    return out;
  });
  const forcings: Record<string, Float64Array> = {};
  for (const [name, values] of Object.entries(body.forcings ?? {})) {
    if (values.length !== length) errors.add(`body.forcings.${name}`, `has ${values.length} values but the members have ${length} (warm-up then lead times)`);
    const unit = knownForcingUnits[name]?.unit ?? '';
    forcings[name] = checkValues(values, forcingLimit(gauge, name, unit), (k) => `body.forcings.${name}[${k}]`, errors);
  }
  if (body.issueObservation != null) {
    const problem = valueProblem(body.issueObservation, flow);
    if (problem) errors.add('body.issueObservation', problem);
  }
  return { issueMs, members, forcings };
}

/** The checks that need the gauge's members and archives; throws with these and the value checks' errors together. */
function checkRun(body: RunRequest, values: ReturnType<typeof checkRunValues>, known: Set<string>, horizonLimit: number, maxTrajectories: number, errors: ErrorList): RunInput {
  const length = body.members[0].values.length;
  const nLeads = length - body.warmupSteps;
  if (nLeads < 1) errors.add('body.warmupSteps', `is ${body.warmupSteps} but members[0] has only ${length} values; at least one lead time is needed`);
  if (nLeads > horizonLimit) errors.add('body.members[0].values', `has ${nLeads} lead times; the error archive covers at most ${horizonLimit}`);
  if (body.trajectories !== undefined && body.trajectories > maxTrajectories) errors.add('body.trajectories', `at most ${maxTrajectories}`);
  const seen = new Set<string>();
  body.members.forEach((m, i) => {
    if (!known.has(m.id)) errors.add(`body.members[${i}].id`, `unknown member ${m.id}; the gauge's members are those in its simulation archive`);
    if (seen.has(m.id)) errors.add(`body.members[${i}].id`, `member ${m.id} appears twice`);
    seen.add(m.id);
  });
  errors.throwIfAny();
  return { issueTime: values.issueMs, nLeads, members: values.members, forcings: values.forcings, issueObservation: body.issueObservation ?? null };
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
  async correct(gauge: Gauge, body: RunRequest, idempotencyKey: string | null, log: { warn: (o: object, msg: string) => void }, started = performance.now()): Promise<RunAnswer> {
    const { db, config, pool, metrics } = this.deps;
    if (idempotencyKey !== null && !/^[\x21-\x7e]{1,200}$/.test(idempotencyKey)) {
      throw invalid([{ path: 'headers.idempotency-key', message: 'must be 1–200 visible ASCII characters' }]);
    }
    const requestHash = createHash('sha256').update(JSON.stringify(body)).digest('hex');
    if (idempotencyKey) {
      const stored = await findRunByIdempotencyKey(db, gauge.id, idempotencyKey);
      if (stored) return { created: false, stored: replay(stored, requestHash, `this Idempotency-Key on gauge ${gauge.id}`, 'headers.idempotency-key') };
    }
    // The run's own values are checked first (so a bad run is refused even where no correction is
    // possible); their errors are sent together with those of the checks against the archive.
    const errors = new ErrorList();
    const values = checkRunValues(body, gauge, errors);
    if (Number.isNaN(values.issueMs)) errors.throwIfAny();
    const byKey = await findRunByKey(db, gauge.id, values.issueMs, body.source);
    if (byKey) return { created: false, stored: replay(byKey, requestHash, `issue time ${body.issueTime} from source ${body.source}`) };

    // Which correction: the active model with its archive, else degraded on the raw archive.
    // Each prefers its per-lead archive (errors of past runs at each lead time) when the run's
    // lead times fit within it, else the lead-free one (continuous simulations).
    const asked = body.members[0].values.length - body.warmupSteps;
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
    const given = checkRun(body, values, known, horizonLimit, config.MAX_TRAJECTORIES, errors);
    // A sequence model's window may reach before the run's warm-up: the archive fills the rest.
    const run = active && correctedArchive ? await withWindowWarmup(db, gauge, active.featureSpec, given, body.members.map((m) => m.id)) : given;
    // Issue-time updating: the latest observation at or before issue time (the run's own wins).
    const updating: UpdatingDecision | null = active && correctedArchive ? await decideUpdating(db, gauge, active, given, body.warmupSteps, body.issueObservation) : null;

    // Thresholds given as water levels become flows through the rating curve in force at issue time.
    const rating = await ratingAtIssue(db, gauge, run.issueTime);
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
            throw invalid([{ path: `body.${err.path}`, message: `${err.message} (needed by model version ${active.id}'s feature spec)` }]);
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
    const stepMs = gauge.stepSeconds * 1000;
    const recentRows = await readObservations(db, gauge.id, { fromMs: run.issueTime - 9 * stepMs, toMs: run.issueTime + 1 });
    const id = randomUUID();
    const createdAt = new Date().toISOString();
    const raw = new Float64Array(run.members.length * H);
    run.members.forEach((m, i) => raw.set(Float64Array.from({ length: H }, (_, k) => m[m.length - H + k]), i * H));
    const timings = { ...result.timings, totalMs: 0 };
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
      errorArchive: { id: used!.id, kind: used!.kind, leadMode: used!.leadMode, leadTimes: archiveReach(used!), cases: Number(used!.summary.cases ?? 0), templates: Number(used!.summary.templates ?? 0), leadGrowth: leadGrowthOf(used!) },
      seed,
      nDraws: result.nDraws,
      attentionLevel: config.ATTENTION_LEVEL,
      probs,
      nLeads: H,
      memberIds: body.members.map((m) => m.id),
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
    try {
      await db.transaction((tx) =>
        insertRun(tx, {
          id,
          gaugeId: gauge.id,
          issueTimeMs: run.issueTime,
          source: body.source,
          requestHash,
          idempotencyKey,
          status,
          modelVersionId: status === 'corrected' ? (active?.id ?? null) : null,
          seed,
          input: body,
          output,
          etag,
          summary,
          percentiles,
          issueObservation:
            updating?.stored && (status === 'corrected' || updating.stored.source === 'run')
              ? updating.stored
              : body.issueObservation != null
                ? { timeMs: run.issueTime, value: body.issueObservation, source: 'run' }
                : null,
        }),
      );
    } catch (err) {
      // A concurrent identical post won the race: answer with what it stored.
      const stored = (idempotencyKey && (await findRunByIdempotencyKey(db, gauge.id, idempotencyKey))) || (await findRunByKey(db, gauge.id, run.issueTime, body.source));
      if (stored) return { created: false, stored: replay(stored, requestHash, 'this run') };
      throw err;
    }
    metrics.runs.inc({ status });
    for (const [stage, ms] of Object.entries({ features: timings.featuresMs, inference: timings.inferenceMs, stochastic: timings.stochasticMs, total: timings.totalMs })) {
      metrics.stage.observe({ stage }, ms / 1000);
    }
    return { created: true, id, etag, output };
  }
}
