// Feature rows for the residual model, built one way for training (continuous simulation or
// reforecast archive) and serving (a run: members × lead times). Rows are row-major
// Float32Array with featureCount(spec) columns in featureNames(spec) order.
import { writeFeatureRow } from './feature-row.ts';
import { FeatureInputError, featureCount, requiredInputs } from './feature-spec.ts';
import type { FeatureSpec } from './feature-spec.ts';

export {
  FeatureInputError,
  checkFeatureSpec,
  featureCount,
  featureNames,
  makeFeatureSpec,
  requiredInputs,
} from './feature-spec.ts';
export type { FeatureSpec, ForcingLags, RequiredInputs } from './feature-spec.ts';

/** A forcing for a run: one series shared by all members, or one series per member. */
export type RunForcing = ArrayLike<number> | ArrayLike<number>[];

/**
 * One forecast run. Every series ends at the last lead time: a series of length n holds the
 * values at issue − (n − nLeads − 1)·step … issue + nLeads·step, so its last nLeads values are
 * leads 1…nLeads and the ones before are at or before issue time (warm-up). Missing = NaN.
 */
export interface RunInput {
  /** Issue time, epoch ms (UTC). Lead k is at issueTime + k·stepSeconds·1000. */
  issueTime: number;
  nLeads: number;
  /** Simulated flow per member (m³/s). */
  members: ArrayLike<number>[];
  forcings?: Record<string, RunForcing>;
  /** Observed flow at issue time; needed when spec.issueError. */
  issueObservation?: number | null;
}

export interface ServingRows {
  /** nMembers·nLeads rows; row m·nLeads + (k − 1) is member m at lead k. */
  rows: Float32Array;
  nRows: number;
  nFeatures: number;
  nMembers: number;
  nLeads: number;
}

export interface ContinuousInput {
  /** Epoch ms, regular step of spec.stepSeconds. */
  times: ArrayLike<number>;
  sim: ArrayLike<number>;
  forcings?: Record<string, ArrayLike<number>>;
  /** Observed flow aligned with times; NaN = missing. */
  obs: ArrayLike<number>;
}

export interface ContinuousRows {
  rows: Float32Array;
  /** Residual obs − sim at the row's time. */
  target: Float64Array;
  /** Time index (into times) of each row. */
  index: Int32Array;
  nRows: number;
  nFeatures: number;
}

export interface ReforecastIssue extends RunInput {
  /** Observed flow at leads 1…nLeads (length nLeads); NaN = missing. */
  obs: ArrayLike<number>;
}

export interface ReforecastRows {
  rows: Float32Array;
  /** Residual obs − member value at the lead. */
  target: Float64Array;
  /** Index into the issues array, member index and lead (1-based) of each row. */
  issue: Int32Array;
  member: Int32Array;
  lead: Int32Array;
  nRows: number;
  nFeatures: number;
}

function isFiniteNumber(v: unknown): v is number {
  return typeof v === 'number' && Number.isFinite(v);
}

function isArrayOrView(v: unknown): boolean {
  return Array.isArray(v) || (ArrayBuffer.isView(v) && !(v instanceof DataView));
}

/** A series of values (null or NaN entries count as missing), not a list of series. */
function isSeries(v: unknown): v is ArrayLike<number> {
  if (ArrayBuffer.isView(v)) return !(v instanceof DataView);
  return Array.isArray(v) && !(v.length > 0 && v.every(isArrayOrView));
}

/**
 * Continuous mode: rows at every time index t of one member's continuous simulation.
 * lead_hours is 0 (no forecast horizon). issue_error is obs(t−1) − sim(t−1): the row is read
 * as a one-step-ahead case issued at t−1, the latest time whose observation would be known
 * before t — exactly what serving computes for lead 1 of a run issued at t−1.
 * Rows with any missing input or a missing target are skipped.
 */
export function continuousRows(spec: FeatureSpec, input: ContinuousInput): ContinuousRows {
  const { times, sim, obs } = input;
  const n = times.length;
  if (sim.length !== n) throw new FeatureInputError('sim', `length ${sim.length} differs from times (${n})`);
  if (obs.length !== n) throw new FeatureInputError('obs', `length ${obs.length} differs from times (${n})`);
  const stepMs = spec.stepSeconds * 1000;
  for (let i = 1; i < n; i++) {
    if (times[i] - times[i - 1] !== stepMs) {
      throw new FeatureInputError(`times[${i}]`, `step must be ${spec.stepSeconds} s`);
    }
  }
  const forcings = spec.forcings.map((f) => {
    const series = input.forcings?.[f.name];
    const path = `forcings.${f.name}`;
    if (series === undefined) throw new FeatureInputError(path, 'missing');
    if (series.length !== n) throw new FeatureInputError(path, `length ${series.length} differs from times (${n})`);
    return series;
  });
  const nF = featureCount(spec);
  const first = requiredInputs(spec).firstContinuousIndex;
  const maxRows = Math.max(0, n - first);
  const rows = new Float32Array(maxRows * nF);
  const target = new Float64Array(maxRows);
  const index = new Int32Array(maxRows);
  const forcingAt = new Int32Array(forcings.length);
  let r = 0;
  for (let t = first; t < n; t++) {
    const y = obs[t] - sim[t];
    if (!Number.isFinite(y)) continue;
    forcingAt.fill(t);
    const issueError = spec.issueError ? obs[t - 1] - sim[t - 1] : 0;
    if (!writeFeatureRow(spec, rows, r * nF, sim, t, forcings, forcingAt, times[t], 0, issueError)) continue;
    target[r] = y;
    index[r] = t;
    r++;
  }
  return { rows: rows.slice(0, r * nF), target: target.slice(0, r), index: index.slice(0, r), nRows: r, nFeatures: nF };
}

/** A run checked against the spec: forcing series per member, in spec.forcings order. */
interface CheckedRun {
  nMembers: number;
  nLeads: number;
  stepMs: number;
  /** forcingSeries[f][m] */
  forcingSeries: ArrayLike<number>[][];
}

/**
 * Structural checks shared by serving and reforecast rows (lengths, presence). `strict` also
 * requires the issue-time observation when the spec uses it.
 */
function checkRun(spec: FeatureSpec, run: RunInput, prefix: string, strict: boolean): CheckedRun {
  const need = requiredInputs(spec);
  const { nLeads, members } = run;
  if (!isFiniteNumber(run.issueTime)) throw new FeatureInputError(`${prefix}issueTime`, 'must be a finite epoch time');
  if (!Number.isInteger(nLeads) || nLeads < 1) throw new FeatureInputError(`${prefix}nLeads`, 'must be a positive integer');
  if (!Array.isArray(members) || members.length === 0) {
    throw new FeatureInputError(`${prefix}members`, 'at least one member is needed');
  }
  const simLength = need.simStepsToIssue + nLeads;
  members.forEach((m, i) => {
    const path = `${prefix}members[${i}].values`;
    if (!isSeries(m)) throw new FeatureInputError(path, 'must be an array of numbers');
    if (m.length < simLength) {
      throw new FeatureInputError(
        path,
        `needs ${simLength} values (${need.simStepsToIssue} up to issue time + ${nLeads} lead times), got ${m.length}`,
      );
    }
  });
  const forcingSeries = spec.forcings.map((f, fi) => {
    const path = `${prefix}forcings.${f.name}`;
    const given = run.forcings?.[f.name];
    if (given === undefined || given === null) throw new FeatureInputError(path, 'missing');
    const length = need.forcings[fi].stepsToIssue + nLeads;
    const checkLength = (s: ArrayLike<number>, p: string): void => {
      if (s.length < length) {
        throw new FeatureInputError(
          p,
          `needs ${length} values (${need.forcings[fi].stepsToIssue} up to issue time + ${nLeads} lead times), got ${s.length}`,
        );
      }
    };
    if (isSeries(given)) {
      checkLength(given, path);
      return members.map(() => given);
    }
    if (!Array.isArray(given) || given.length !== members.length) {
      throw new FeatureInputError(path, `must be one series, or one series per member (${members.length})`);
    }
    given.forEach((s, m) => {
      if (!isSeries(s)) throw new FeatureInputError(`${path}[${m}]`, 'must be an array of numbers');
      checkLength(s, `${path}[${m}]`);
    });
    return given;
  });
  if (strict && need.issueObservation && !isFiniteNumber(run.issueObservation)) {
    throw new FeatureInputError(`${prefix}issueObservation`, 'needed by this model (it uses the issue-time error)');
  }
  return { nMembers: members.length, nLeads, stepMs: spec.stepSeconds * 1000, forcingSeries };
}

/** Serving only: every value a row reads must be finite; names the first offender. */
function checkFinite(spec: FeatureSpec, run: RunInput, checked: CheckedRun): void {
  const need = requiredInputs(spec);
  const scan = (s: ArrayLike<number>, from: number, path: string): void => {
    for (let i = Math.max(0, from); i < s.length; i++) {
      if (!Number.isFinite(s[i])) throw new FeatureInputError(`${path}[${i}]`, 'missing or not a finite number');
    }
  };
  run.members.forEach((m, i) => scan(m, m.length - run.nLeads - need.simStepsToIssue, `members[${i}].values`));
  spec.forcings.forEach((f, fi) => {
    const from = (s: ArrayLike<number>): number => s.length - run.nLeads - need.forcings[fi].stepsToIssue;
    const given = run.forcings![f.name];
    if (isSeries(given)) scan(given, from(given), `forcings.${f.name}`);
    else checked.forcingSeries[fi].forEach((s, m) => scan(s, from(s), `forcings.${f.name}[${m}]`));
  });
}

/**
 * Writes the rows of one run (member-major, then lead) starting at row `row0`.
 * `keep(m, k)` is called after each row; a row whose inputs are missing is reported with
 * ok = false (its slot is reused). Returns the number of rows kept.
 */
function runRows(
  spec: FeatureSpec,
  run: RunInput,
  checked: CheckedRun,
  out: Float32Array,
  row0: number,
  keep: (row: number, m: number, k: number, ok: boolean) => boolean,
): number {
  const nF = featureCount(spec);
  const nForcings = spec.forcings.length;
  const forcingAt = new Int32Array(nForcings);
  const forcingRow: ArrayLike<number>[] = new Array(nForcings);
  const issueObs = run.issueObservation ?? Number.NaN;
  const leadStepHours = spec.stepSeconds / 3600;
  let r = row0;
  for (let m = 0; m < checked.nMembers; m++) {
    const sim = run.members[m];
    const issueAt = sim.length - checked.nLeads - 1; // index of issue time in this member's series
    const issueError = spec.issueError ? issueObs - sim[issueAt] : 0;
    for (let f = 0; f < nForcings; f++) forcingRow[f] = checked.forcingSeries[f][m];
    for (let k = 1; k <= checked.nLeads; k++) {
      for (let f = 0; f < nForcings; f++) forcingAt[f] = forcingRow[f].length - checked.nLeads - 1 + k;
      const validTime = run.issueTime + k * checked.stepMs;
      const ok = writeFeatureRow(spec, out, r * nF, sim, issueAt + k, forcingRow, forcingAt, validTime, k * leadStepHours, issueError);
      if (keep(r, m, k, ok)) r++;
    }
  }
  return r - row0;
}

/**
 * Serving rows for a run, all members × lead times in one batch. Throws FeatureInputError
 * naming the field (`members[3].values`, `forcings.precipitation`, `issueObservation`, …) when
 * anything the spec needs is missing. `out` may be passed to reuse a buffer of at least
 * nMembers·nLeads·nFeatures values.
 */
export function servingRows(spec: FeatureSpec, run: RunInput, out?: Float32Array): ServingRows {
  const checked = checkRun(spec, run, '', true);
  checkFinite(spec, run, checked);
  const nF = featureCount(spec);
  const nRows = checked.nMembers * checked.nLeads;
  if (out !== undefined && out.length < nRows * nF) {
    throw new RangeError(`output buffer holds ${out.length} values, ${nRows * nF} needed`);
  }
  const rows = out ?? new Float32Array(nRows * nF);
  runRows(spec, run, checked, rows, 0, (_r, m, k, ok) => {
    // checkFinite has already named any missing value, so this cannot happen.
    if (!ok) throw new FeatureInputError(`members[${m}].values`, `missing input at lead ${k}`);
    return true;
  });
  return { rows: out === undefined ? rows : rows.subarray(0, nRows * nF), nRows, nFeatures: nF, nMembers: checked.nMembers, nLeads: checked.nLeads };
}

/**
 * Training rows from a reforecast archive: each issue is laid out exactly like a serving run
 * (same row builder, same lead_hours and issue_error), plus observations at the leads.
 * Rows with missing inputs or missing observation are skipped; structural errors throw with
 * paths like `issues[2].members[0].values`.
 */
export function reforecastRows(spec: FeatureSpec, issues: ReforecastIssue[]): ReforecastRows {
  const nF = featureCount(spec);
  const checkedAll = issues.map((run, i) => {
    // Not strict: a missing issue observation only skips that issue's rows.
    const checked = checkRun(spec, run, `issues[${i}].`, false);
    if (!isSeries(run.obs) || run.obs.length !== run.nLeads) {
      throw new FeatureInputError(`issues[${i}].obs`, `needs one value per lead time (${run.nLeads})`);
    }
    return checked;
  });
  return collectReforecastRows(issues, nF, (i, rows, r, keep) => runRows(spec, issues[i], checkedAll[i], rows, r, keep));
}

/**
 * The rows of past runs, one builder for flat feature rows and for windows: `lay` writes issue i's
 * rows from row r on, asking `keep` for each; a row is kept when its inputs are complete and the
 * target (observed − simulated at the lead) is finite.
 */
export function collectReforecastRows(
  issues: ReforecastIssue[],
  width: number,
  lay: (i: number, rows: Float32Array, r: number, keep: (row: number, m: number, k: number, ok: boolean) => boolean) => number,
): ReforecastRows {
  let maxRows = 0;
  for (const run of issues) maxRows += run.members.length * run.nLeads;
  const rows = new Float32Array(maxRows * width);
  const target = new Float64Array(maxRows);
  const issue = new Int32Array(maxRows);
  const member = new Int32Array(maxRows);
  const lead = new Int32Array(maxRows);
  let r = 0;
  issues.forEach((run, i) => {
    r += lay(i, rows, r, (row, m, k, ok) => {
      if (!ok) return false;
      const sim = run.members[m];
      const y = run.obs[k - 1] - sim[sim.length - run.nLeads - 1 + k];
      if (!Number.isFinite(y)) return false;
      target[row] = y;
      issue[row] = i;
      member[row] = m;
      lead[row] = k;
      return true;
    });
  });
  return { rows: rows.slice(0, r * width), target: target.slice(0, r), issue: issue.slice(0, r), member: member.slice(0, r), lead: lead.slice(0, r), nRows: r, nFeatures: width };
}
