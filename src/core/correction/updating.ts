// Issue-time updating: what the last observation says about the corrected members' error at each
// lead time. Pure computation: the pseudo-forecast cube built from continuous simulations, the
// closed-form predictors (AR(1) and φ per lead, Box & Jenkins), per-lead scores, and the updater
// applied to a run's corrected members.
import { crpsSorted } from '../scores/crps.ts';
import { forwardTransform, inverseTransform, type ErrorTransform } from '../stochastic/error-transform.ts';
import type { FeatureSpec } from '../features/feature-spec.ts';
import { isSequenceSpec, type SequenceSpec } from '../features/sequence-spec.ts';

/**
 * The updater stored with a model version. In the error transform T of the version's archive,
 * with ε0 = T(observed) − T(corrected) of a member at the observation's time, the member's value
 * at lead k (counted from the observation) becomes T⁻¹(T(corrected) + phi[k − 1]·ε0). Leads past
 * phi.length, and leads switched off (phi = 0), are not updated.
 */
export interface UpdatingModel {
  method: 'ar1' | 'phi-per-lead';
  transform: ErrorTransform;
  /** Multiplier of the issue-time error at leads 1 … phi.length (0 where updating is off). */
  phi: number[];
  /** The AR(1) coefficient of the corrected error series (also kept for 'phi-per-lead', for reading). */
  ar1: number;
}

/** A gauge's default: the latest observation may be this many steps older than the issue time. */
export const DEFAULT_MAX_OBSERVATION_AGE_STEPS = 2;

/**
 * Pseudo-forecasts from continuous simulations, as dense cubes. Issue i (a time index t), member
 * m, lead k (1 … nLeads): the "forecast" at t + k is the member's continuous simulation there, so
 * no forecast-forcing error is present (real past runs carry it). NaN = missing.
 */
export interface PseudoForecastCube {
  nIssues: number;
  nMembers: number;
  nLeads: number;
  /** Number of earlier raw errors kept besides the one at issue time. */
  history: number;
  /** Time index of each issue. */
  issueIndex: Int32Array;
  /** ε0: T(obs) − T(corrected) at issue time, [i·M + m]. */
  issueError: Float64Array;
  /** Raw errors T(obs) − T(sim) at t, t − 1, …, t − history: [(i·M + m)·(history + 1) + j]. */
  rawError: Float64Array;
  /** Corrected flow at t + k: [(i·M + m)·L + k − 1]. */
  corrected: Float64Array;
  /** Simulated (raw) flow at t + k, same layout. */
  simulated: Float64Array;
  /** Observed flow at t + k: [i·L + k − 1]. */
  observed: Float64Array;
  /** Target: T(obs) − T(corrected) at t + k, member layout. */
  target: Float64Array;
}

export interface PseudoForecastInput {
  transform: ErrorTransform;
  /** Observed flow on the time axis. */
  observed: ArrayLike<number>;
  /** Per member: raw continuous simulation and the residual-corrected one (NaN where not corrected). */
  simulated: ArrayLike<number>[];
  corrected: ArrayLike<number>[];
  /** Time indices used as issue times. */
  issueIndex: ArrayLike<number>;
  nLeads: number;
  history?: number;
}

const finite = Number.isFinite;

/** T(obs) − T(value), or NaN when either is missing. */
export function transformedError(t: ErrorTransform, observed: number, value: number): number {
  if (!finite(observed) || !finite(value)) return NaN;
  return forwardTransform(t, observed) - forwardTransform(t, value);
}

export function buildPseudoForecasts(input: PseudoForecastInput): PseudoForecastCube {
  const { transform: tr, observed } = input;
  const M = input.simulated.length;
  if (M === 0 || input.corrected.length !== M) throw new RangeError('one simulated and one corrected series per member are needed');
  const L = input.nLeads;
  if (!Number.isInteger(L) || L < 1) throw new RangeError('nLeads must be a positive integer');
  const hist = input.history ?? 2;
  const n = observed.length;
  const I = input.issueIndex.length;
  const issueIndex = Int32Array.from(input.issueIndex);
  const issueError = new Float64Array(I * M).fill(NaN);
  const rawError = new Float64Array(I * M * (hist + 1)).fill(NaN);
  const corrected = new Float64Array(I * M * L).fill(NaN);
  const simulated = new Float64Array(I * M * L).fill(NaN);
  const obsAt = new Float64Array(I * L).fill(NaN);
  const target = new Float64Array(I * M * L).fill(NaN);
  for (let i = 0; i < I; i++) {
    const t = issueIndex[i];
    for (let k = 1; k <= L; k++) if (t + k < n) obsAt[i * L + k - 1] = observed[t + k];
    for (let m = 0; m < M; m++) {
      const sim = input.simulated[m];
      const cor = input.corrected[m];
      const im = i * M + m;
      issueError[im] = transformedError(tr, observed[t], cor[t]);
      for (let j = 0; j <= hist; j++) if (t - j >= 0) rawError[im * (hist + 1) + j] = transformedError(tr, observed[t - j], sim[t - j]);
      for (let k = 1; k <= L; k++) {
        if (t + k >= n) break;
        const c = im * L + k - 1;
        corrected[c] = cor[t + k];
        simulated[c] = sim[t + k];
        target[c] = transformedError(tr, observed[t + k], cor[t + k]);
      }
    }
  }
  return { nIssues: I, nMembers: M, nLeads: L, history: hist, issueIndex, issueError, rawError, corrected, simulated, observed: obsAt, target };
}

/**
 * Conditional least-squares AR(1) coefficient of a zero-mean series split in pieces (members),
 * φ = Σ e_t·e_{t−1} / Σ e_{t−1}² over consecutive finite pairs (Box & Jenkins, Time Series
 * Analysis, ch. 7: least-squares estimation of an autoregressive model).
 */
export function fitAr1(series: ArrayLike<number>[], from = 0, to = Infinity): number {
  let sxy = 0;
  let sxx = 0;
  for (const e of series) {
    const end = Math.min(e.length, to);
    for (let t = Math.max(1, from + 1); t < end; t++) {
      const a = e[t - 1];
      const b = e[t];
      if (!finite(a) || !finite(b)) continue;
      sxy += a * b;
      sxx += a * a;
    }
  }
  if (!(sxx > 0)) throw new RangeError('no consecutive pair of errors to fit an AR(1) on');
  return sxy / sxx;
}

/** φ^k for k = 1 … nLeads: the k-step-ahead AR(1) predictor's multiplier (Box & Jenkins, ch. 5). */
export function ar1Multipliers(phi: number, nLeads: number): number[] {
  return Array.from({ length: nLeads }, (_, k) => phi ** (k + 1));
}

/**
 * Real past runs as a cube of the same layout: `raw` and `corrected` are the runs' members per
 * lead, [(u·M + m)·nLeads + k − 1]; the issue-time error is that of the member's continuous
 * corrected simulation at the issue time (what serving computes from the run's warm-up). Unlike
 * pseudo-forecasts these carry the forecast-forcing error.
 */
export function buildPastRunCube(input: {
  transform: ErrorTransform;
  observed: ArrayLike<number>;
  /** Continuous corrected simulation of each kept member (for the issue-time error). */
  correctedContinuous: ArrayLike<number>[];
  issueIndex: ArrayLike<number>;
  runLeads: number;
  raw: ArrayLike<number>;
  corrected: ArrayLike<number>;
  nLeads: number;
}): PseudoForecastCube {
  const { transform: tr, observed } = input;
  const M = input.correctedContinuous.length;
  const I = input.issueIndex.length;
  const L = input.nLeads;
  const H = input.runLeads;
  const n = observed.length;
  const cube: PseudoForecastCube = {
    nIssues: I,
    nMembers: M,
    nLeads: L,
    history: 0,
    issueIndex: Int32Array.from(input.issueIndex),
    issueError: new Float64Array(I * M).fill(NaN),
    rawError: new Float64Array(I * M).fill(NaN),
    corrected: new Float64Array(I * M * L).fill(NaN),
    simulated: new Float64Array(I * M * L).fill(NaN),
    observed: new Float64Array(I * L).fill(NaN),
    target: new Float64Array(I * M * L).fill(NaN),
  };
  for (let i = 0; i < I; i++) {
    const t = cube.issueIndex[i];
    for (let k = 1; k <= Math.min(L, H); k++) if (t + k < n) cube.observed[i * L + k - 1] = observed[t + k];
    for (let m = 0; m < M; m++) {
      cube.issueError[i * M + m] = transformedError(tr, observed[t], input.correctedContinuous[m][t]);
      for (let k = 1; k <= Math.min(L, H); k++) {
        const src = (i * M + m) * H + k - 1;
        const c = (i * M + m) * L + k - 1;
        cube.corrected[c] = input.corrected[src];
        cube.simulated[c] = input.raw[src];
        cube.target[c] = t + k < n ? transformedError(tr, observed[t + k], input.corrected[src]) : NaN;
      }
    }
  }
  return cube;
}

/**
 * φ_k per lead by least squares without intercept, y_k ≈ φ_k·ε0, over the cube's issues in
 * `issues` (indices into the cube) and all members; further (cube, issues) parts are pooled in.
 */
export function fitPhiPerLead(cube: PseudoForecastCube, issues: ArrayLike<number>, ...more: { cube: PseudoForecastCube; issues: ArrayLike<number> }[]): number[] {
  const L = cube.nLeads;
  const sxy = new Float64Array(L);
  const sxx = new Float64Array(L);
  for (const part of [{ cube, issues }, ...more]) accumulatePhi(part.cube, part.issues, sxy, sxx);
  return Array.from({ length: L }, (_, k) => (sxx[k] > 0 ? sxy[k] / sxx[k] : 0));
}

function accumulatePhi(cube: PseudoForecastCube, issues: ArrayLike<number>, sxy: Float64Array, sxx: Float64Array): void {
  const { nMembers: M, nLeads: L } = cube;
  for (let u = 0; u < issues.length; u++) {
    const i = issues[u];
    for (let m = 0; m < M; m++) {
      const x = cube.issueError[i * M + m];
      if (!finite(x)) continue;
      for (let k = 0; k < L; k++) {
        const y = cube.target[(i * M + m) * L + k];
        if (!finite(y)) continue;
        sxy[k] += x * y;
        sxx[k] += x * x;
      }
    }
  }
}

/** The updated value of one corrected member value: T⁻¹(T(value) + shift). */
export function shiftInTransform(t: ErrorTransform, value: number, shift: number): number {
  if (shift === 0) return value;
  return inverseTransform(t, forwardTransform(t, value) + shift);
}

/**
 * Predicted error shift per (issue, member, lead) of the cube: how a candidate updates. Returns
 * [(i·M + m)·L + k − 1] for the issues given (compact, in that order); NaN where it cannot predict.
 */
export type ShiftPredictor = (cube: PseudoForecastCube, issues: ArrayLike<number>) => Float64Array;

export function multiplierPredictor(phi: ArrayLike<number>): ShiftPredictor {
  return (cube, issues) => {
    const { nMembers: M, nLeads: L } = cube;
    const out = new Float64Array(issues.length * M * L);
    for (let u = 0; u < issues.length; u++) {
      for (let m = 0; m < M; m++) {
        const e0 = cube.issueError[issues[u] * M + m];
        for (let k = 0; k < L; k++) out[(u * M + m) * L + k] = k < phi.length ? phi[k] * e0 : 0;
      }
    }
    return out;
  };
}

/** Scores of one candidate per lead on a block of issues: members' RMSE and ensemble CRPS, in m³/s. */
export interface LeadScore {
  lead: number;
  /** Issues with an observation and every member value present. */
  n: number;
  rmse: number | null;
  crps: number | null;
}

/**
 * Per lead: RMSE of the updated members against the observation and the CRPS of the updated
 * members as an ensemble (standard CRPS of the empirical distribution, Hersbach 2000 / Gneiting
 * & Raftery 2007). Also returns the per-(issue, lead) CRPS [u·L + k − 1] for paired comparisons.
 */
export function scoreShifts(
  cube: PseudoForecastCube,
  transform: ErrorTransform,
  issues: ArrayLike<number>,
  shifts: Float64Array | null,
): { byLead: LeadScore[]; crps: Float64Array } {
  const { nMembers: M, nLeads: L } = cube;
  const buf = new Float64Array(M);
  const perCase = new Float64Array(issues.length * L).fill(NaN);
  const se = new Float64Array(L);
  const seN = new Float64Array(L);
  const cr = new Float64Array(L);
  const n = new Float64Array(L);
  for (let u = 0; u < issues.length; u++) {
    const i = issues[u];
    for (let k = 0; k < L; k++) {
      const y = cube.observed[i * L + k];
      if (!finite(y)) continue;
      let ok = true;
      for (let m = 0; m < M; m++) {
        const c = cube.corrected[(i * M + m) * L + k];
        const s = shifts ? shifts[(u * M + m) * L + k] : 0;
        if (!finite(c)) {
          ok = false;
          break;
        }
        buf[m] = finite(s) ? shiftInTransform(transform, c, s) : c;
      }
      if (!ok) continue;
      for (let m = 0; m < M; m++) se[k] += (buf[m] - y) ** 2;
      seN[k] += M;
      buf.sort();
      const c = crpsSorted(buf, y);
      perCase[u * L + k] = c;
      cr[k] += c;
      n[k]++;
    }
  }
  const byLead = Array.from({ length: L }, (_, k) => ({
    lead: k + 1,
    n: n[k],
    rmse: seN[k] ? Math.sqrt(se[k] / seN[k]) : null,
    crps: n[k] ? cr[k] / n[k] : null,
  }));
  return { byLead, crps: perCase };
}

/**
 * Mean of a − b over issues per lead, with a standard error from batch means (contiguous blocks of
 * issues, so the day-to-day dependence of errors is kept inside a batch; common practice for
 * autocorrelated series, e.g. Wilks, Statistical Methods in the Atmospheric Sciences, ch. 5).
 */
export function pairedLeadDifference(a: Float64Array, b: Float64Array, nIssues: number, nLeads: number, batches = 20): { mean: number | null; se: number | null }[] {
  return Array.from({ length: nLeads }, (_, k) => {
    const d: number[] = [];
    for (let u = 0; u < nIssues; u++) {
      const x = a[u * nLeads + k] - b[u * nLeads + k];
      if (finite(x)) d.push(x);
    }
    if (!d.length) return { mean: null, se: null };
    const mean = d.reduce((s, x) => s + x, 0) / d.length;
    const B = Math.min(batches, Math.floor(d.length / 2));
    if (B < 2) return { mean, se: null };
    const size = Math.floor(d.length / B);
    const means: number[] = [];
    for (let b0 = 0; b0 < B; b0++) {
      let s = 0;
      for (let j = b0 * size; j < (b0 + 1) * size; j++) s += d[j];
      means.push(s / size);
    }
    const mm = means.reduce((s, x) => s + x, 0) / B;
    const v = means.reduce((s, x) => s + (x - mm) ** 2, 0) / (B - 1);
    return { mean, se: Math.sqrt(v / B) };
  });
}

/**
 * Whether a run can update: the residual model's row at the observation's time (ageSteps before
 * issue) needs that many more warm-up values than the lead-time rows. `warmupSteps` counts the
 * values at or before issue time. Returns null when it can, else why not.
 */
export function updatingWarmupProblem(spec: FeatureSpec | SequenceSpec, warmupSteps: number, ageSteps: number): string | null {
  if (isSequenceSpec(spec)) {
    // A window of `window` steps ending at the observation's time.
    const need = spec.window + ageSteps;
    return warmupSteps < need ? `the run carries ${warmupSteps} values up to issue time; the sequence model needs ${need} for its window at the observation's time` : null;
  }
  if (spec.issueError || spec.leadTime) return "the version's residual model reads the lead time or the issue error itself";
  const sim = spec.simLags + ageSteps + 1;
  let need = sim;
  for (const f of spec.forcings) need = Math.max(need, f.lags + ageSteps + 1);
  if (warmupSteps < need) return `the run carries ${warmupSteps} values up to issue time; the residual model needs ${need} to correct the member at the observation's time`;
  return null;
}

/**
 * Applies an updater to a run's corrected members in place. `corrected` is [(model·M + m)·H + h];
 * `atObservation` is each (model, member)'s corrected value at the observation's time, [model·M + m];
 * the observation is `ageSteps` steps before issue, so lead h + 1 of the run is lead h + 1 + ageSteps
 * from it. Returns each (model, member)'s ε0.
 */
export function applyUpdating(
  model: UpdatingModel,
  corrected: Float64Array,
  atObservation: ArrayLike<number>,
  observation: number,
  ageSteps: number,
  nLeads: number,
): Float64Array {
  const nMM = atObservation.length;
  if (corrected.length !== nMM * nLeads) throw new RangeError('corrected must hold one value per (model, member) and lead');
  const e0 = new Float64Array(nMM);
  for (let mm = 0; mm < nMM; mm++) {
    const e = transformedError(model.transform, observation, atObservation[mm]);
    if (!finite(e)) throw new RangeError(`the corrected member ${mm} at the observation's time is not finite`);
    e0[mm] = e;
    for (let h = 0; h < nLeads; h++) {
      const k = h + 1 + ageSteps;
      const phi = k <= model.phi.length ? model.phi[k - 1] : 0;
      const i = mm * nLeads + h;
      corrected[i] = shiftInTransform(model.transform, corrected[i], phi * e);
    }
  }
  return e0;
}

/** Checks a stored updater (read back from the database). */
export function checkUpdatingModel(v: unknown): UpdatingModel {
  const m = v as UpdatingModel;
  if (!m || (m.method !== 'ar1' && m.method !== 'phi-per-lead')) throw new RangeError('updating.method must be ar1 or phi-per-lead');
  if (!Array.isArray(m.phi) || !m.phi.every((p) => typeof p === 'number' && finite(p))) throw new RangeError('updating.phi must be finite numbers');
  if (!m.transform || typeof m.transform !== 'object') throw new RangeError('updating.transform is missing');
  return m;
}
