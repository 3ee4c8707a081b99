// Input windows of a sequence residual model, built one way for training (a member's continuous
// simulation) and serving (a run: members × lead times). A window row holds window × steps
// values, step-major (row r, step j, feature f at r·window·F + j·F + f), which is exactly the
// memory of the [N, window, F] tensor the model takes. Pure: no I/O, no clock.
import { yearFraction } from '../day-of-year.ts';
import { FeatureInputError } from './feature-spec.ts';
import { collectReforecastRows, type ContinuousInput, type ContinuousRows, type ReforecastIssue, type ReforecastRows, type RunInput, type ServingRows } from './features.ts';
import { sequenceForcings, sequenceWidth, type SequenceSpec } from './sequence-spec.ts';

const TWO_PI = 2 * Math.PI;
const SIM = 0;
const FORCING = 1;
const SIN = 2;
const COS = 3;

/** What each step feature reads, resolved once per call (no string compares in the row loop). */
interface Plan {
  T: number;
  F: number;
  kind: Int8Array;
  /** Index into the forcing list (FORCING steps only). */
  forcing: Int32Array;
  log: Uint8Array;
  center: Float64Array;
  invScale: Float64Array;
  forcingNames: string[];
}

function plan(spec: SequenceSpec): Plan {
  const forcingNames = sequenceForcings(spec);
  const F = spec.steps.length;
  const p: Plan = {
    T: spec.window,
    F,
    kind: new Int8Array(F),
    forcing: new Int32Array(F).fill(-1),
    log: new Uint8Array(F),
    center: new Float64Array(F),
    invScale: new Float64Array(F),
    forcingNames,
  };
  spec.steps.forEach((s, f) => {
    p.kind[f] = s.name === 'sim' ? SIM : s.name === 'day_of_year_sin' ? SIN : s.name === 'day_of_year_cos' ? COS : FORCING;
    if (p.kind[f] === FORCING) p.forcing[f] = forcingNames.indexOf(s.name);
    p.log[f] = s.transform === 'log1p' ? 1 : 0;
    p.center[f] = s.center;
    p.invScale[f] = 1 / s.scale;
  });
  return p;
}

/**
 * Fills the step matrix S[u·F + f] (float32, scaled) for u = 0 … nSteps − 1, step u reading
 * sim[simAt0 + u], forcings[k][forcingAt0[k] + u] and the season at seasonAt0 + u; bad[u] = 1
 * where a value is missing or outside its transform (log1p of a value ≤ −1). A window of T
 * steps starting at u is then the contiguous slice S[u·F … (u + T)·F): windows that overlap
 * share their values, and each value is transformed once, not once per window.
 */
function fillSteps(
  p: Plan,
  S: Float32Array,
  bad: Uint8Array,
  nSteps: number,
  sim: ArrayLike<number>,
  simAt0: number,
  forcings: ArrayLike<number>[],
  forcingAt0: Int32Array,
  sin: Float64Array,
  cos: Float64Array,
  seasonAt0: number,
): void {
  const F = p.F;
  for (let u = 0; u < nSteps; u++) {
    let isBad = 0;
    for (let f = 0; f < F; f++) {
      const kind = p.kind[f];
      let v: number;
      if (kind === SIM) v = sim[simAt0 + u];
      else if (kind === FORCING) v = forcings[p.forcing[f]][forcingAt0[p.forcing[f]] + u];
      else if (kind === SIN) v = sin[seasonAt0 + u];
      else v = cos[seasonAt0 + u];
      if (p.log[f] === 1) v = Math.log1p(v);
      if (!Number.isFinite(v)) isBad = 1;
      S[u * F + f] = (v - p.center[f]) * p.invScale[f];
    }
    bad[u] = isBad;
  }
}

/** badBefore[u] = number of bad steps before u, so a window's check costs two reads. */
function countBad(bad: Uint8Array, nSteps: number, badBefore: Int32Array): void {
  badBefore[0] = 0;
  for (let u = 0; u < nSteps; u++) badBefore[u + 1] = badBefore[u] + bad[u];
}

/** Season sine and cosine at times start + u·step, u = 0 … n − 1. */
function seasonAt(start: number, stepMs: number, n: number): { sin: Float64Array; cos: Float64Array } {
  const sin = new Float64Array(n);
  const cos = new Float64Array(n);
  for (let u = 0; u < n; u++) {
    const angle = TWO_PI * yearFraction(start + u * stepMs);
    sin[u] = Math.sin(angle);
    cos[u] = Math.cos(angle);
  }
  return { sin, cos };
}

/** Steps of each series a run needs at or before issue time, in addition to one per lead time. */
export function sequenceStepsToIssue(spec: SequenceSpec): number {
  return spec.window - 1;
}

/**
 * Continuous mode: a window ending at every time index t of one member's continuous simulation
 * (t ≥ window − 1); target obs(t) − sim(t). Rows with a missing value or target are skipped.
 */
export function continuousWindows(spec: SequenceSpec, input: ContinuousInput): ContinuousRows {
  const p = plan(spec);
  const { times, sim, obs } = input;
  const n = times.length;
  if (sim.length !== n) throw new FeatureInputError('sim', `length ${sim.length} differs from times (${n})`);
  if (obs.length !== n) throw new FeatureInputError('obs', `length ${obs.length} differs from times (${n})`);
  const stepMs = spec.stepSeconds * 1000;
  for (let i = 1; i < n; i++) {
    if (times[i] - times[i - 1] !== stepMs) throw new FeatureInputError(`times[${i}]`, `step must be ${spec.stepSeconds} s`);
  }
  const forcings = p.forcingNames.map((name) => {
    const s = input.forcings?.[name];
    if (s === undefined) throw new FeatureInputError(`forcings.${name}`, 'missing');
    if (s.length !== n) throw new FeatureInputError(`forcings.${name}`, `length ${s.length} differs from times (${n})`);
    return s;
  });
  const width = sequenceWidth(spec);
  const maxRows = Math.max(0, n - (p.T - 1));
  const rows = new Float32Array(maxRows * width);
  const target = new Float64Array(maxRows);
  const index = new Int32Array(maxRows);
  const season = n > 0 ? seasonAt(times[0], stepMs, n) : { sin: new Float64Array(0), cos: new Float64Array(0) };
  const S = new Float32Array(n * p.F);
  const bad = new Uint8Array(n);
  const badBefore = new Int32Array(n + 1);
  fillSteps(p, S, bad, n, sim, 0, forcings, new Int32Array(forcings.length), season.sin, season.cos, 0);
  countBad(bad, n, badBefore);
  let r = 0;
  for (let t = p.T - 1; t < n; t++) {
    const y = obs[t] - sim[t];
    if (!Number.isFinite(y)) continue;
    const u = t - p.T + 1;
    if (badBefore[t + 1] - badBefore[u] > 0) continue;
    rows.set(S.subarray(u * p.F, (t + 1) * p.F), r * width);
    target[r] = y;
    index[r] = t;
    r++;
  }
  return { rows: rows.slice(0, r * width), target: target.slice(0, r), index: index.slice(0, r), nRows: r, nFeatures: width };
}

function isSeries(v: unknown): v is ArrayLike<number> {
  if (ArrayBuffer.isView(v)) return !(v instanceof DataView);
  return Array.isArray(v) && !(v.length > 0 && v.every((x) => Array.isArray(x) || ArrayBuffer.isView(x)));
}

/** Per forcing (plan order), the series of each member; checks lengths and presence. */
function checkRunWindows(spec: SequenceSpec, p: Plan, run: RunInput, prefix: string): ArrayLike<number>[][] {
  const { nLeads, members } = run;
  if (typeof run.issueTime !== 'number' || !Number.isFinite(run.issueTime)) throw new FeatureInputError(`${prefix}issueTime`, 'must be a finite epoch time');
  if (!Number.isInteger(nLeads) || nLeads < 1) throw new FeatureInputError(`${prefix}nLeads`, 'must be a positive integer');
  if (!Array.isArray(members) || members.length === 0) throw new FeatureInputError(`${prefix}members`, 'at least one member is needed');
  const before = sequenceStepsToIssue(spec);
  const length = before + nLeads;
  const need = (s: ArrayLike<number>, path: string): void => {
    if (s.length < length) throw new FeatureInputError(path, `needs ${length} values (${before} up to issue time + ${nLeads} lead times) for a ${spec.window}-step window, got ${s.length}`);
  };
  members.forEach((m, i) => {
    const path = `${prefix}members[${i}].values`;
    if (!isSeries(m)) throw new FeatureInputError(path, 'must be an array of numbers');
    need(m, path);
  });
  return p.forcingNames.map((name) => {
    const path = `${prefix}forcings.${name}`;
    const given = run.forcings?.[name];
    if (given === undefined || given === null) throw new FeatureInputError(path, 'missing');
    if (isSeries(given)) {
      need(given, path);
      return members.map(() => given);
    }
    if (!Array.isArray(given) || given.length !== members.length) throw new FeatureInputError(path, `must be one series, or one series per member (${members.length})`);
    given.forEach((s, m) => {
      if (!isSeries(s)) throw new FeatureInputError(`${path}[${m}]`, 'must be an array of numbers');
      need(s, `${path}[${m}]`);
    });
    return given;
  });
}

/**
 * Writes the windows of one run (member-major, then lead) from row `row0`; `keep` decides per
 * window whether its slot is kept. Returns the number of rows kept.
 */
function runWindows(
  spec: SequenceSpec,
  p: Plan,
  run: RunInput,
  forcingSeries: ArrayLike<number>[][],
  out: Float32Array,
  row0: number,
  keep: (row: number, m: number, k: number, ok: boolean) => boolean,
): number {
  const width = sequenceWidth(spec);
  const H = run.nLeads;
  const stepMs = spec.stepSeconds * 1000;
  // Step u = 0 … H + T − 2 is at issue + (u + 2 − T)·step; lead k's window is steps k − 1 … k + T − 2.
  const nSteps = H + p.T - 1;
  const season = seasonAt(run.issueTime + (2 - p.T) * stepMs, stepMs, nSteps);
  const nF = p.forcingNames.length;
  const forcingRow: ArrayLike<number>[] = new Array(nF);
  const forcingAt0 = new Int32Array(nF);
  const S = new Float32Array(nSteps * p.F);
  const bad = new Uint8Array(nSteps);
  const badBefore = new Int32Array(nSteps + 1);
  let r = row0;
  for (let m = 0; m < run.members.length; m++) {
    const sim = run.members[m];
    for (let f = 0; f < nF; f++) {
      forcingRow[f] = forcingSeries[f][m];
      forcingAt0[f] = forcingRow[f].length - nSteps;
    }
    fillSteps(p, S, bad, nSteps, sim, sim.length - nSteps, forcingRow, forcingAt0, season.sin, season.cos, 0);
    countBad(bad, nSteps, badBefore);
    for (let k = 1; k <= H; k++) {
      const ok = badBefore[k - 1 + p.T] - badBefore[k - 1] === 0;
      if (ok) out.set(S.subarray((k - 1) * p.F, (k - 1 + p.T) * p.F), r * width);
      if (keep(r, m, k, ok)) r++;
    }
  }
  return r - row0;
}

/**
 * Serving windows for a run, all members × lead times in one batch (row m·nLeads + k − 1 is
 * member m at lead k). Throws FeatureInputError naming the field (`members[3].values[12]`,
 * `forcings.precipitation`) when a value the windows read is missing. `out` may be passed to
 * reuse a buffer.
 */
export function servingWindows(spec: SequenceSpec, run: RunInput, out?: Float32Array): ServingRows {
  const p = plan(spec);
  const forcingSeries = checkRunWindows(spec, p, run, '');
  const width = sequenceWidth(spec);
  const nRows = run.members.length * run.nLeads;
  if (out !== undefined && out.length < nRows * width) throw new RangeError(`output buffer holds ${out.length} values, ${nRows * width} needed`);
  const rows = out ?? new Float32Array(nRows * width);
  const before = sequenceStepsToIssue(spec);
  runWindows(spec, p, run, forcingSeries, rows, 0, (_r, m, k, ok) => {
    if (ok) return true;
    // Name the first value the failed window reads that is missing (or outside its transform).
    const from = (s: ArrayLike<number>) => s.length - run.nLeads - before + k - 1;
    const bad = (s: ArrayLike<number>, log: boolean) => {
      for (let i = from(s); i < from(s) + p.T; i++) if (!Number.isFinite(log ? Math.log1p(s[i]) : s[i])) return i;
      return -1;
    };
    const simLog = spec.steps.some((s) => s.name === 'sim' && s.transform === 'log1p');
    const i = bad(run.members[m], simLog);
    if (i >= 0 && spec.steps.some((s) => s.name === 'sim')) throw new FeatureInputError(`members[${m}].values[${i}]`, 'missing, not a finite number, or outside the log1p transform');
    for (const [fi, name] of p.forcingNames.entries()) {
      const s = forcingSeries[fi][m];
      const j = bad(s, spec.steps.some((st) => st.name === name && st.transform === 'log1p'));
      if (j >= 0) {
        const shared = isSeries(run.forcings![name]);
        throw new FeatureInputError(`forcings.${name}${shared ? '' : `[${m}]`}[${j}]`, 'missing, not a finite number, or outside the log1p transform');
      }
    }
    throw new FeatureInputError(`members[${m}].values`, `missing input at lead ${k}`);
  });
  return { rows: out === undefined ? rows : rows.subarray(0, nRows * width), nRows, nFeatures: width, nMembers: run.members.length, nLeads: run.nLeads };
}

/**
 * Training windows from past runs: each issue laid out exactly like a serving run, plus the
 * observations at the leads. Windows with a missing value or observation are skipped.
 */
export function reforecastWindows(spec: SequenceSpec, issues: ReforecastIssue[]): ReforecastRows {
  const p = plan(spec);
  const width = sequenceWidth(spec);
  const checked = issues.map((run, i) => {
    const s = checkRunWindows(spec, p, run, `issues[${i}].`);
    if (!isSeries(run.obs) || run.obs.length !== run.nLeads) throw new FeatureInputError(`issues[${i}].obs`, `needs one value per lead time (${run.nLeads})`);
    return s;
  });
  return collectReforecastRows(issues, width, (i, rows, r, keep) => runWindows(spec, p, issues[i], checked[i], rows, r, keep));
}
