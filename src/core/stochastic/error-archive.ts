import {
  checkTransform,
  forwardTransform,
  resolveTransform,
  type ErrorTransform,
  type ErrorTransformSpec,
} from './error-transform.ts';
import { NEIGHBOUR_KERNELS, type NeighbourKernel } from './knn.ts';
import { validateForcingPaths, type ForcingPaths } from './forcing-paths.ts';

/**
 * Error archive for the stochastic error stage: past cases of (predictor = corrected flow,
 * lead index, day of year, error) for the kNN search, plus historical error trajectories used
 * as Schaake shuffle templates. Structure of typed arrays: cheap to post to a worker thread
 * (structured clone copies the buffers; see archiveBuffers to transfer them) and to store as
 * bytes (archive-codec.ts).
 *
 * Cases are grouped by lead index; a lead-free archive (nLeads = 0, from a continuous
 * simulation) has one group serving every lead. Archives whose cases know the error at their
 * issue time (past runs, pseudo-forecasts) may also split each lead into strata of that issue
 * error (issueErrorEdges, ascending; S = edges + 1 strata), so a run issued while the model is far
 * off draws errors from similar situations. Within a group, cases are sorted ascending by
 * predictor so the nearest neighbours of a value are found by binary search.
 *
 *   group g = lead group · S + stratum (lead group 0 … max(nLeads, 1) − 1)
 *           = cases groupStart[g] … groupStart[g + 1] − 1
 *   predictor[i]  corrected flow of case i (m³/s)
 *   error[i]      T(observed) − T(corrected) in the archive's transform space
 *   dayOfYear[i]  day of year (1 … 366) of the case's valid time
 *
 * Templates: templateValues is one series of historical errors (transform space, NaN where the
 * observation was missing and no template covers it). Template t at lead h is
 * templateValues[templateStart[t] + h], h < templateLength. Lead-free archives store the error
 * series itself and templates are windows starting on consecutive (or every `templateStride`-th)
 * days with at most TEMPLATE_MAX_MISSING missing, filled by interpolation; reforecast archives
 * store the issue × lead error matrix row-major and each issue row as nearly complete is a
 * template. templateDayOfYear[t] is the day of year of the template's first value (lead 0).
 * templateRank is derived, not stored: the rank of each series value (ties broken by position,
 * missing = 0xffffffff) among all finite values (lead-free) or within its lead column
 * (reforecasts); see rankTemplateValues. The shuffle only needs the rank order of values that
 * meet at the same lead, so no template values are sorted per call.
 */
export interface ErrorArchive {
  format: 1;
  transform: ErrorTransform;
  /** Lead times covered; 0 = lead-free archive. */
  nLeads: number;
  groupStart: Int32Array;
  predictor: Float64Array;
  error: Float64Array;
  dayOfYear: Uint16Array;
  templateLength: number;
  templateValues: Float64Array;
  templateStart: Int32Array;
  templateDayOfYear: Uint16Array;
  templateRank: Uint32Array;
  /** Neighbour kernel and k = round(kScale·√n) chosen on held-out data at fit time (absent: 1/j, √n). */
  neighbours?: NeighbourSettings;
  /** Edges of the issue-error strata (transform space, ascending); absent = one stratum. */
  issueErrorEdges?: Float64Array;
  /**
   * Factor per lead (index h, the archive's lead for per-lead archives; leads past the end use the
   * last) by which the stage widens the drawn errors about their neighbours' mean, so bands grow
   * with lead as forecast errors do and the centre stays (see lead-growth.ts): archives of errors
   * without forecast-forcing error (continuous simulations, pseudo-forecasts). Absent = no growth.
   */
  leadScale?: Float64Array;
  /**
   * Forecast-forcing deviation paths measured on stored past runs (forcing-paths.ts): a run within
   * their reach adds one to each trajectory instead of widening by leadScale. Absent = none.
   */
  forcingPaths?: ForcingPaths;
}

/** Number of issue-error strata of an archive. */
export function archiveStrata(a: Pick<ErrorArchive, 'issueErrorEdges'>): number {
  return (a.issueErrorEdges?.length ?? 0) + 1;
}

/** The stratum (0 … edges.length) of an issue error: how many edges lie at or below it. */
export function stratumOf(edges: ArrayLike<number> | undefined, e: number): number {
  let s = 0;
  if (edges) while (s < edges.length && edges[s] <= e) s++;
  return s;
}

/** Cases of lead group g over all its strata. */
export function casesInLeadGroup(a: Pick<ErrorArchive, 'groupStart' | 'issueErrorEdges'>, g: number): number {
  const S = archiveStrata(a);
  return a.groupStart[(g + 1) * S] - a.groupStart[g * S];
}

export interface NeighbourSettings {
  kernel: NeighbourKernel;
  kScale: number;
}

/** Largest share of a template window that may be missing (filled from its neighbours). */
export const TEMPLATE_MAX_MISSING = 0.1;

export const MISSING_RANK = 0xffffffff;

function finite(v: number | null | undefined): v is number {
  return v !== null && v !== undefined && Number.isFinite(v);
}

function checkDayOfYear(d: number, where: string): void {
  if (!(Number.isInteger(d) && d >= 1 && d <= 366)) throw new RangeError(`${where}: day of year must be an integer 1 … 366, got ${d}`);
}

/**
 * Ranks of the finite template values, ties broken by position; MISSING_RANK for NaN.
 * stride = 0: one ranking over the whole series (lead-free archives, whose overlapping windows
 * meet any value at any lead). stride = nLeads: each lead column (values i·stride + h) ranked on
 * its own (reforecast archives, where values meet only within their lead), which keeps ranks
 * below the number of issues and so the shuffle's sort keys short.
 */
export function rankTemplateValues(values: Float64Array, stride = 0): Uint32Array {
  const rank = new Uint32Array(values.length).fill(MISSING_RANK);
  const nCols = stride > 0 ? stride : 1;
  const step = stride > 0 ? stride : 1;
  for (let c = 0; c < nCols; c++) {
    const idx: number[] = [];
    for (let i = c; i < values.length; i += step) if (Number.isFinite(values[i])) idx.push(i);
    idx.sort((a, b) => values[a] - values[b] || a - b);
    for (let r = 0; r < idx.length; r++) rank[idx[r]] = r;
  }
  return rank;
}

/** Groups cases by lead and sorts each group by predictor (ties by original order). */
function packCases(
  nGroups: number,
  group: Int32Array,
  pred: Float64Array,
  err: Float64Array,
  doy: Uint16Array,
): Pick<ErrorArchive, 'groupStart' | 'predictor' | 'error' | 'dayOfYear'> {
  const n = group.length;
  const order = Array.from({ length: n }, (_, i) => i);
  order.sort((a, b) => group[a] - group[b] || pred[a] - pred[b] || a - b);
  const groupStart = new Int32Array(nGroups + 1);
  for (let i = 0; i < n; i++) groupStart[group[i] + 1]++;
  for (let g = 0; g < nGroups; g++) groupStart[g + 1] += groupStart[g];
  const predictor = new Float64Array(n);
  const error = new Float64Array(n);
  const dayOfYear = new Uint16Array(n);
  for (let i = 0; i < n; i++) {
    const k = order[i];
    predictor[i] = pred[k];
    error[i] = err[k];
    dayOfYear[i] = doy[k];
  }
  return { groupStart, predictor, error, dayOfYear };
}

/**
 * Starts of the template windows [s, s + L) of an error series: every `stride`-th window whose
 * missing values are at most TEMPLATE_MAX_MISSING of its length (real series have scattered gaps;
 * demanding complete windows leaves none of a long horizon). With segmentLength, the series is
 * equal segments laid end to end (members' series concatenated) and no window crosses from one
 * segment into the next.
 */
export function templateWindowStarts(series: Float64Array, L: number, stride = 1, segmentLength = series.length): number[] {
  const maxMissing = Math.floor(TEMPLATE_MAX_MISSING * L);
  const starts: number[] = [];
  let missing = 0;
  let eligible = 0;
  for (let e = 0; e < series.length; e++) {
    if (Number.isNaN(series[e])) missing++;
    const s = e - L + 1;
    if (s > 0 && Number.isNaN(series[s - 1])) missing--;
    const oneSegment = Math.floor(s / segmentLength) === Math.floor(e / segmentLength);
    if (s >= 0 && oneSegment && missing <= maxMissing && missing < L) {
      if (eligible % stride === 0) starts.push(s);
      eligible++;
    }
  }
  return starts;
}

/**
 * Fills the missing values inside the template windows by linear interpolation between the
 * nearest present values of the same segment (the nearest one at an edge). Only the templates'
 * rank order uses the filled values; the kNN cases never do.
 */
export function fillTemplateGaps(series: Float64Array, starts: ArrayLike<number>, L: number, segmentLength = series.length): void {
  const covered = new Int32Array(series.length + 1);
  for (let t = 0; t < starts.length; t++) {
    covered[starts[t]]++;
    covered[starts[t] + L]--;
  }
  let depth = 0;
  for (let i = 0; i < series.length; i++) {
    depth += covered[i];
    if (depth === 0 || !Number.isNaN(series[i])) continue;
    const lo = Math.floor(i / segmentLength) * segmentLength;
    const hi = Math.min(series.length, lo + segmentLength);
    let a = i - 1;
    while (a >= lo && Number.isNaN(series[a])) a--;
    let b = i + 1;
    while (b < hi && Number.isNaN(series[b])) b++;
    const va = a >= lo ? series[a] : NaN;
    const vb = b < hi ? series[b] : NaN;
    series[i] = Number.isNaN(va) ? vb : Number.isNaN(vb) ? va : va + ((vb - va) * (i - a)) / (b - a);
  }
}

/**
 * Why an archive cannot serve runs of `horizon` steps with a Schaake shuffle, or null when it can:
 * a lead without cases, or fewer than `minTemplates` templates of that length.
 */
export function templateShortfall(a: ErrorArchive, horizon: number, minTemplates = MIN_TEMPLATES): string | null {
  for (let g = 0; g < Math.max(a.nLeads, 1); g++) {
    if (casesInLeadGroup(a, g) === 0) return a.nLeads ? `no case at lead ${g + 1}` : 'no case (no step has both a simulated and an observed flow)';
  }
  if (a.templateLength < horizon) return `Schaake templates cover ${a.templateLength} steps; runs need ${horizon}`;
  if (a.templateStart.length < minTemplates) {
    return `only ${a.templateStart.length} Schaake templates of ${a.templateLength} steps (each may miss at most ${Math.round(TEMPLATE_MAX_MISSING * 100)} % of its observations); at least ${minTemplates} are needed: shorten templateLength or fill the observation gaps`;
  }
  return null;
}

/** Fewest templates an archive needs to serve runs: our own rule of thumb (fewer make the shuffle's dependence rest on a handful of past situations). */
export const MIN_TEMPLATES = 20;

export interface SeriesArchiveInput {
  /** Corrected (or raw) simulated flow per time step. */
  corrected: ArrayLike<number | null>;
  /** Observed flow per time step; null/NaN = missing (case skipped; filled in template windows). */
  observed: ArrayLike<number | null>;
  /** Day of year (1 … 366) of each time step. */
  dayOfYear: ArrayLike<number>;
  transform?: ErrorTransformSpec;
  /** Length of each template window in steps: the longest horizon the archive can shuffle. */
  templateLength: number;
  /** Keep every n-th eligible window as a template (default 1: every start). */
  templateStride?: number;
  /** The series is equal segments of this length end to end (members); windows stay in one. */
  segmentLength?: number;
}

/**
 * Lead-free archive from a continuous series (e.g. a validation-period simulation after the
 * residual model): every step with both values is a case; templates are windows of
 * `templateLength` consecutive errors with at most TEMPLATE_MAX_MISSING of them missing.
 */
export function buildArchiveFromSeries(input: SeriesArchiveInput): ErrorArchive {
  const { corrected, observed, dayOfYear } = input;
  const S = corrected.length;
  if (observed.length !== S || dayOfYear.length !== S) throw new RangeError('corrected, observed and dayOfYear must have the same length');
  const L = input.templateLength;
  if (!Number.isInteger(L) || L < 1) throw new RangeError('templateLength must be a positive integer');
  const stride = input.templateStride ?? 1;
  if (!Number.isInteger(stride) || stride < 1) throw new RangeError('templateStride must be a positive integer');
  const transform = resolveTransform(input.transform ?? { kind: 'none' }, observed);

  const series = new Float64Array(S).fill(NaN);
  let n = 0;
  for (let i = 0; i < S; i++) {
    checkDayOfYear(dayOfYear[i], `dayOfYear[${i}]`);
    const c = corrected[i];
    const o = observed[i];
    if (!finite(c) || !finite(o)) continue;
    series[i] = forwardTransform(transform, o) - forwardTransform(transform, c);
    n++;
  }
  const group = new Int32Array(n);
  const pred = new Float64Array(n);
  const err = new Float64Array(n);
  const doy = new Uint16Array(n);
  let k = 0;
  for (let i = 0; i < S; i++) {
    if (Number.isNaN(series[i])) continue;
    pred[k] = corrected[i] as number;
    err[k] = series[i];
    doy[k] = dayOfYear[i];
    k++;
  }
  const segment = input.segmentLength ?? S;
  if (!Number.isInteger(segment) || segment < 1) throw new RangeError('segmentLength must be a positive integer');
  const starts = templateWindowStarts(series, L, stride, segment);
  fillTemplateGaps(series, starts, L, segment);
  const templateStart = Int32Array.from(starts);
  const templateDayOfYear = Uint16Array.from(starts, (s) => dayOfYear[s]);
  return {
    format: 1,
    transform,
    nLeads: 0,
    ...packCases(1, group, pred, err, doy),
    templateLength: L,
    templateValues: series,
    templateStart,
    templateDayOfYear,
    templateRank: rankTemplateValues(series),
  };
}

export interface ReforecastArchiveInput {
  nIssues: number;
  nLeads: number;
  /** Corrected flow, row-major nIssues × nLeads ([issue·nLeads + lead]). */
  corrected: ArrayLike<number | null>;
  /** Observed flow at each lead's valid time, same layout; null/NaN = missing. */
  observed: ArrayLike<number | null>;
  /** Day of year (1 … 366) of each lead's valid time, same layout. */
  dayOfYear: ArrayLike<number>;
  transform?: ErrorTransformSpec;
}

/**
 * Archive from reforecasts: the case of (issue, lead) goes to the group of its lead; each issue
 * whose errors miss at most TEMPLATE_MAX_MISSING of its leads is a template (its historical error
 * trajectory, gaps filled).
 */
export function buildArchiveFromReforecasts(input: ReforecastArchiveInput): ErrorArchive {
  const { nIssues, nLeads, corrected, observed, dayOfYear } = input;
  if (!Number.isInteger(nIssues) || nIssues < 1 || !Number.isInteger(nLeads) || nLeads < 1) {
    throw new RangeError('nIssues and nLeads must be positive integers');
  }
  const size = nIssues * nLeads;
  if (corrected.length !== size || observed.length !== size || dayOfYear.length !== size) {
    throw new RangeError('corrected, observed and dayOfYear must each hold nIssues × nLeads values');
  }
  const transform = resolveTransform(input.transform ?? { kind: 'none' }, observed);
  const matrix = new Float64Array(size).fill(NaN);
  for (let i = 0; i < size; i++) {
    const c = corrected[i];
    const o = observed[i];
    if (!finite(c) || !finite(o)) continue;
    matrix[i] = forwardTransform(transform, o) - forwardTransform(transform, c);
  }
  return archiveFromErrorMatrix({ nIssues, nLeads, predictor: corrected, error: matrix, dayOfYear, transform });
}

/** Edges at the j/S quantiles (j = 1 … S − 1) of the finite issue errors, repeats dropped. */
function issueErrorEdges(issueError: ArrayLike<number>, S: number): Float64Array | undefined {
  if (!Number.isInteger(S) || S < 1) throw new RangeError('strata must be a positive integer');
  const v = Float64Array.from(issueError).filter((x) => Number.isFinite(x)).sort();
  if (S === 1 || v.length < 2 * S) return undefined;
  const edges: number[] = [];
  for (let j = 1; j < S; j++) {
    const e = v[Math.floor((j * v.length) / S)];
    if (!edges.length || e > edges[edges.length - 1]) edges.push(e);
  }
  return edges.length ? Float64Array.from(edges) : undefined;
}

/**
 * Per-lead archive from an issue × lead matrix of predictors and errors (transform space, NaN =
 * no case), laid out row-major; see buildArchiveFromReforecasts.
 */
export function archiveFromErrorMatrix(input: {
  nIssues: number;
  nLeads: number;
  predictor: ArrayLike<number | null>;
  error: Float64Array;
  dayOfYear: ArrayLike<number>;
  transform: ErrorTransform;
  /** Error at each issue row's issue time (transform space; NaN = unknown): cases are split into strata of it. */
  issueError?: ArrayLike<number>;
  /** Strata of the issue error (default 5 when issueError is given). */
  strata?: number;
}): ErrorArchive {
  const { nIssues, nLeads, predictor, error: matrix, dayOfYear, transform } = input;
  if (input.issueError && input.issueError.length !== nIssues) throw new RangeError('issueError must hold one value per issue row');
  const edges = input.issueError ? issueErrorEdges(input.issueError, input.strata ?? 5) : undefined;
  const S = (edges?.length ?? 0) + 1;
  let n = 0;
  for (let i = 0; i < matrix.length; i++) {
    checkDayOfYear(dayOfYear[i], `dayOfYear[${i}]`);
    if (!Number.isNaN(matrix[i])) {
      if (!finite(predictor[i])) throw new RangeError(`case ${i} has an error but no predictor`);
      n++;
    }
  }
  const group = new Int32Array(n);
  const pred = new Float64Array(n);
  const err = new Float64Array(n);
  const doy = new Uint16Array(n);
  const starts: number[] = [];
  const maxMissing = Math.floor(TEMPLATE_MAX_MISSING * nLeads);
  let k = 0;
  for (let is = 0; is < nIssues; is++) {
    let missing = 0;
    for (let h = 0; h < nLeads; h++) {
      const i = is * nLeads + h;
      if (Number.isNaN(matrix[i])) {
        missing++;
        continue;
      }
      // A row with an unknown issue error joins the middle stratum.
      const ie = input.issueError ? input.issueError[is] : NaN;
      group[k] = h * S + (Number.isNaN(ie) ? S >> 1 : stratumOf(edges, ie));
      pred[k] = predictor[i] as number;
      err[k] = matrix[i];
      doy[k] = dayOfYear[i];
      k++;
    }
    if (missing <= maxMissing && missing < nLeads) starts.push(is * nLeads);
  }
  fillTemplateGaps(matrix, starts, nLeads, nLeads);
  return {
    format: 1,
    transform,
    nLeads,
    ...(edges ? { issueErrorEdges: edges } : {}),
    ...packCases(nLeads * S, group, pred, err, doy),
    templateLength: nLeads,
    templateValues: matrix,
    templateStart: Int32Array.from(starts),
    templateDayOfYear: Uint16Array.from(starts, (s) => dayOfYear[s]),
    templateRank: rankTemplateValues(matrix, nLeads),
  };
}

/** Throws a RangeError naming the first inconsistency (used after decoding stored archives). */
export function validateArchive(a: ErrorArchive): void {
  if (a.format !== 1) throw new RangeError(`unsupported archive format ${String(a.format)}`);
  checkTransform(a.transform);
  if (a.neighbours !== undefined) {
    const { kernel, kScale } = a.neighbours;
    if (!NEIGHBOUR_KERNELS.includes(kernel)) throw new RangeError(`unknown neighbour kernel ${String(kernel)}`);
    if (!(typeof kScale === 'number' && kScale > 0 && Number.isFinite(kScale))) throw new RangeError('neighbour kScale must be a positive number');
  }
  if (a.leadScale !== undefined) {
    if (a.leadScale.length === 0) throw new RangeError('leadScale must not be empty');
    for (const g of a.leadScale) if (!(Number.isFinite(g) && g > 0)) throw new RangeError('leadScale factors must be positive and finite');
  }
  if (a.forcingPaths !== undefined) validateForcingPaths(a.forcingPaths);
  if (a.issueErrorEdges !== undefined) {
    if (a.nLeads === 0) throw new RangeError('issue-error strata need a per-lead archive');
    for (let j = 0; j < a.issueErrorEdges.length; j++) {
      if (!Number.isFinite(a.issueErrorEdges[j]) || (j > 0 && !(a.issueErrorEdges[j] > a.issueErrorEdges[j - 1]))) throw new RangeError('issueErrorEdges must be finite and increasing');
    }
  }
  const nGroups = Math.max(a.nLeads, 1) * archiveStrata(a);
  if (!Number.isInteger(a.nLeads) || a.nLeads < 0) throw new RangeError('nLeads must be an integer ≥ 0');
  if (a.groupStart.length !== nGroups + 1 || a.groupStart[0] !== 0 || a.groupStart[nGroups] !== a.predictor.length) {
    throw new RangeError('groupStart does not match the cases');
  }
  if (a.error.length !== a.predictor.length || a.dayOfYear.length !== a.predictor.length) {
    throw new RangeError('predictor, error and dayOfYear lengths differ');
  }
  for (let g = 0; g < nGroups; g++) {
    if (a.groupStart[g + 1] < a.groupStart[g]) throw new RangeError('groupStart must not decrease');
    for (let i = a.groupStart[g] + 1; i < a.groupStart[g + 1]; i++) {
      if (!(a.predictor[i] >= a.predictor[i - 1])) throw new RangeError(`predictor not sorted in group ${g} at case ${i}`);
    }
  }
  for (let i = 0; i < a.predictor.length; i++) {
    if (!Number.isFinite(a.error[i]) || !Number.isFinite(a.predictor[i])) throw new RangeError(`case ${i} is not finite`);
    checkDayOfYear(a.dayOfYear[i], `case ${i}`);
  }
  if (a.templateStart.length !== a.templateDayOfYear.length) throw new RangeError('templateStart and templateDayOfYear lengths differ');
  if (a.templateRank.length !== a.templateValues.length) throw new RangeError('templateRank does not match templateValues');
  if (a.nLeads > 0) {
    // Reforecast templates are whole issue rows of the lead-major matrix (per-lead ranks rely on it).
    if (a.templateValues.length % a.nLeads !== 0 || a.templateLength !== a.nLeads) {
      throw new RangeError('reforecast templates must be issue rows of nLeads values');
    }
    for (let t = 0; t < a.templateStart.length; t++) {
      if (a.templateStart[t] % a.nLeads !== 0) throw new RangeError(`template ${t} does not start an issue row`);
    }
  }
  for (let t = 0; t < a.templateStart.length; t++) {
    const s = a.templateStart[t];
    if (!(s >= 0 && s + a.templateLength <= a.templateValues.length)) throw new RangeError(`template ${t} runs past the series`);
    for (let h = 0; h < a.templateLength; h++) {
      if (!Number.isFinite(a.templateValues[s + h])) throw new RangeError(`template ${t} has a missing value at lead ${h}`);
    }
  }
}

/** The archive's buffers, for postMessage(archive, archiveBuffers(archive)) (detaches them here). */
export function archiveBuffers(a: ErrorArchive): ArrayBuffer[] {
  return [
    a.groupStart,
    a.predictor,
    a.error,
    a.dayOfYear,
    a.templateValues,
    a.templateStart,
    a.templateDayOfYear,
    a.templateRank,
    ...(a.forcingPaths ? [a.forcingPaths.values] : []),
  ].map((x) => x.buffer as ArrayBuffer);
}
