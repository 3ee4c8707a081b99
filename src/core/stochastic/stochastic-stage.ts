import { archiveStrata, MISSING_RANK, stratumOf, type ErrorArchive } from './error-archive.ts';
import { countAboveSorted } from '../scores/exceedance.ts';
import { circularDayDistance, defaultK, kernelCumulative, nearestWindow, nearestWithRandomTies, type NeighbourKernel } from './knn.ts';
import { createPrng, type Prng } from '../prng.ts';
import { quantileSorted } from '../scores/quantile.ts';
import { sortNonNegative } from './radix-sort.ts';
import { forwardTransform } from './error-transform.ts';
import { drawForcingPaths } from './forcing-paths.ts';

/**
 * Stochastic error stage: turns corrected members into N member-coherent trajectories carrying
 * the total predictive uncertainty (kNN error resampling, Lall & Sharma 1996; Schaake shuffle,
 * Clark et al. 2004, applied to the errors as in ensemble copula coupling, Schefzik et al. 2013).
 * The same function serves raw members with an archive of raw errors.
 *
 * Per call:
 *  1. Each draw j is given one (model, member) for the whole horizon: members are dealt out in
 *     turn and the deal shuffled, so every member carries N / (models × members) draws (±1).
 *  2. For every (model, member, lead), the k archived cases nearest in predictor value (same
 *     lead group and, for archives split by issue error, the member's issue-error stratum;
 *     optionally within ±seasonalWindowDays of the lead's valid day of year, circular) are found; cases at equal distance (tied predictors, zero flows) are taken in a
 *     random (seeded) order, never by their position in the archive. k = round(kScale·√n) of the
 *     candidates unless given.
 *  3. At each lead every draw picks one of its member's k neighbours with the kernel (default
 *     the Lall & Sharma 1/j weights) and adds its error in the archive's transform space:
 *     value = max(0, T⁻¹(T(member) + g_h·error)), g_h the archive's lead scale (1 without one).
 *  4. Schaake shuffle of the errors, member by member: the draws of one member are reordered
 *     so that, at each lead, the rank of their values among that member's draws follows the
 *     rank of their historical error templates. Each trajectory therefore stays on its member
 *     (its level and shape) and only its error path follows a historical one; reordering the
 *     totals across members instead would make trajectories jump between members and inflate
 *     the "exceeded at any time" probability. The per-lead values (the marginals) are the
 *     unshuffled draws exactly. Templates: those whose first day of year is within the seasonal
 *     window of lead 0's day of year (all templates if the window is unset or holds none); N
 *     distinct ones are drawn at random when there are at least N, otherwise all are reused in
 *     turn. Ties between template values (reused templates) and template gaps are broken at
 *     random. Template choice uses its own random stream, so switching the shuffle off leaves
 *     the marginals unchanged.
 *  5. Forecast-forcing paths (archives that carry them, runs within their reach; forcing-paths.ts):
 *     each trajectory is given one past run's deviation path, drawn at random from all of them, and
 *     adds it at every lead after the shuffle: T⁻¹(T(value) + δ_h), clipped at 0.
 *     The archive's leadScale is then not applied: the paths carry the growth with lead.
 *  Quantiles and per-lead exceedance come from the values after step 5; "exceeded at any time in the
 *  horizon" from the maxima of the trajectories. Each probability p carries its Monte-Carlo
 *  standard error √(p(1 − p)/N) (binomial).
 *
 * Everything is determined by the seed. Large buffers live in a reusable workspace.
 *
 * Caller's side of the contract: lead index h of the forecast uses the archive's lead h
 * (per-lead archives); the archive's time step equals the forecast's (lead-free templates are
 * windows of consecutive archive steps); a workspace serves one call at a time (one per worker).
 */

export const DEFAULT_QUANTILE_PROBS: readonly number[] = [0.05, 0.1, 0.25, 0.5, 0.75, 0.9, 0.95];

/** Below this many trajectories the exceedance probabilities are coarse (a 1/N grid, wide sampling error). */
export const COARSE_TRAJECTORIES = 200;

export interface StochasticInput {
  /** Corrected members, layout [(model·nMembers + member)·nLeads + lead], m³/s. */
  members: ArrayLike<number>;
  /** Residual models bundled (default 1). */
  nModels?: number;
  nMembers: number;
  nLeads: number;
  /** Valid-time day of year (1 … 366) per lead, or one value for all leads. Needed for seasonal windows. */
  dayOfYear?: ArrayLike<number> | number;
  /**
   * Error at issue time per (model·nMembers + member), in the archive's transform space
   * (T(observed) − T(member)); NaN = unknown. With an archive split into issue-error strata each
   * member draws from the stratum of its own issue error (unknown: the middle one).
   */
  issueError?: ArrayLike<number>;
  /**
   * Steps between the issue-time error's observation and the issue time (per-lead archives only;
   * default 0). Lead h of the run is lead h + leadOffset from that observation, so it draws from
   * the archive's lead h + leadOffset, the last lead where that passes the archive's end.
   */
  leadOffset?: number;
}

export interface StochasticOptions {
  seed: number;
  /** Trajectories to draw (default 1000). */
  nDraws?: number;
  /** Fixed neighbour count; default round(kScale·√n) of the candidate cases at each lead. */
  k?: number;
  /** Multiplier of √n for the default k (default: the archive's chosen one, else 1). */
  kScale?: number;
  /** Weights of the k neighbours by rank (default: the archive's chosen kernel, else 'lall-sharma'). */
  kernel?: NeighbourKernel;
  /** Use only archived cases (and templates) within ± this many days of year; unset = all. */
  seasonalWindowDays?: number | null;
  /** Quantile probabilities (default 0.05, 0.1, 0.25, 0.5, 0.75, 0.9, 0.95). */
  probs?: ArrayLike<number>;
  /** Flow thresholds for exceedance (event: value > threshold). */
  thresholds?: ArrayLike<number>;
  /** Apply the Schaake shuffle (default true). false = errors independent across leads. */
  shuffle?: boolean;
  /** Add the archive's forecast-forcing paths when it has them and they reach the run (default true). */
  forcingPaths?: boolean;
  /** Return the N × nLeads trajectories (default false). */
  keepTrajectories?: boolean;
  /**
   * Walk every member's k nearest cases even for the uniform kernel (default false: the uniform
   * kernel reads them as a window of the sorted candidates). For checking one against the other.
   */
  walkNeighbours?: boolean;
  /** When given, the milliseconds spent in each part of the stage are added to it. */
  timings?: StageTimings;
}

/** Where the stage's time goes (milliseconds, added to by each call that is given it). */
export interface StageTimings {
  /** Checks, transform of the members, random streams, template choice. */
  setupMs: number;
  /** Candidate cases per lead and the k nearest of each member. */
  knnMs: number;
  /** Kernel draws of the neighbours' errors. */
  samplingMs: number;
  /** The Schaake shuffle within members (and the trajectories' maxima). */
  shuffleMs: number;
  /** Sorting each lead's values, quantiles and exceedance probabilities. */
  summaryMs: number;
}

export function emptyStageTimings(): StageTimings {
  return { setupMs: 0, knnMs: 0, samplingMs: 0, shuffleMs: 0, summaryMs: 0 };
}

export interface StochasticResult {
  nLeads: number;
  nDraws: number;
  probs: Float64Array;
  /** [lead·probs.length + q]. */
  quantiles: Float64Array;
  thresholds: Float64Array;
  /** P(value > threshold) per lead: [threshold·nLeads + lead]. */
  exceedance: Float64Array;
  /** Monte-Carlo standard error of each exceedance probability, √(p(1 − p)/N); same layout. */
  exceedanceStandardError: Float64Array;
  /** P(threshold exceeded at any lead of the horizon), from the trajectories' maxima. */
  exceedanceAnyTime: Float64Array;
  /** Monte-Carlo standard error of each any-time probability. */
  exceedanceAnyTimeStandardError: Float64Array;
  /** Per threshold, the first lead index with exceedance > 0.5, or null. */
  firstLikelyLead: (number | null)[];
  /** Neighbour count used at each lead. */
  kPerLead: Int32Array;
  /** The kernel the neighbours were weighted with. */
  kernel: NeighbourKernel;
  /** The (model·nMembers + member) each trajectory follows. */
  memberIndex: Int32Array;
  /** Trajectories [draw·nLeads + lead] when keepTrajectories, else null. */
  trajectories: Float64Array | null;
  /** Archive template index each trajectory followed (null without shuffle). */
  templateIndex: Int32Array | null;
  /** Forcing path each trajectory carried (null when none was added). */
  pathIndex: Int32Array | null;
}

/** Binomial Monte-Carlo standard error of a probability estimated from n draws. */
export function monteCarloStandardError(p: number, n: number): number {
  return Math.sqrt((p * (1 - p)) / n);
}

type TypedArray = Float64Array | Int32Array | Uint32Array | Uint16Array;

/** Reusable buffers for runStochasticStage; one per thread, not shared between concurrent calls. */
export class StochasticWorkspace {
  private buffers = new Map<string, TypedArray>();

  /** The named buffer, grown (by half again) when it is shorter than size. */
  private get<T extends TypedArray>(name: string, size: number, make: new (n: number) => T): T {
    let a = this.buffers.get(name) as T | undefined;
    if (!a || a.length < size) {
      a = new make(Math.max(size, Math.ceil((a?.length ?? 0) * 1.5)));
      this.buffers.set(name, a);
    }
    return a;
  }

  f64(name: string, size: number): Float64Array {
    return this.get(name, size, Float64Array);
  }

  u32(name: string, size: number): Uint32Array {
    return this.get(name, size, Uint32Array);
  }

  u16(name: string, size: number): Uint16Array {
    return this.get(name, size, Uint16Array);
  }

  i32(name: string, size: number): Int32Array {
    return this.get(name, size, Int32Array);
  }
}

export function createStochasticWorkspace(): StochasticWorkspace {
  return new StochasticWorkspace();
}

function positiveInt(v: number, name: string): number {
  if (!Number.isInteger(v) || v < 1) throw new RangeError(`${name} must be a positive integer, got ${v}`);
  return v;
}

/** Tie-breaking keys hold a draw's position in a random permutation in their low 24 bits. */
const TIE_SPAN = 2 ** 24;
const INV_TIE_SPAN = 2 ** -24;

export function runStochasticStage(
  archive: ErrorArchive,
  input: StochasticInput,
  options: StochasticOptions,
  workspace: StochasticWorkspace = new StochasticWorkspace(),
): StochasticResult {
  // Clock reads only when asked for (about five per lead).
  const timings = options.timings ?? null;
  let clock = timings ? performance.now() : 0;
  const lap = (): number => {
    const now = performance.now();
    const d = now - clock;
    clock = now;
    return d;
  };
  // ---- validation ---------------------------------------------------------------------------
  const nModels = positiveInt(input.nModels ?? 1, 'nModels');
  const nMembers = positiveInt(input.nMembers, 'nMembers');
  const H = positiveInt(input.nLeads, 'nLeads');
  const N = positiveInt(options.nDraws ?? 1000, 'nDraws');
  if (N > TIE_SPAN) throw new RangeError('nDraws must be at most 2^24');
  const nMM = nModels * nMembers;
  const members = input.members;
  if (members.length !== nMM * H) throw new RangeError(`members must hold nModels × nMembers × nLeads = ${nMM * H} values, got ${members.length}`);
  for (let i = 0; i < members.length; i++) {
    if (!Number.isFinite(members[i])) throw new RangeError(`members[${i}] is not a finite number`);
  }
  const leadFree = archive.nLeads === 0;
  if (!leadFree && H > archive.nLeads) {
    throw new RangeError(`forecast has ${H} lead times but the archive covers ${archive.nLeads}`);
  }
  const leadOffset = input.leadOffset ?? 0;
  if (!(Number.isInteger(leadOffset) && leadOffset >= 0)) throw new RangeError('leadOffset must be a non-negative integer');
  // The archive's lead group serving the run's lead h.
  const groupOfLead = (h: number): number => (leadFree ? 0 : Math.min(h + leadOffset, archive.nLeads - 1));
  const window = options.seasonalWindowDays ?? null;
  if (window !== null && !(window >= 0)) throw new RangeError('seasonalWindowDays must be ≥ 0');
  const doy = workspace.f64('doy', H);
  const hasDoy = input.dayOfYear !== undefined;
  for (let h = 0; h < H; h++) {
    const d = typeof input.dayOfYear === 'number' ? input.dayOfYear : input.dayOfYear ? input.dayOfYear[h] : 0;
    if (hasDoy && !(Number.isInteger(d) && d >= 1 && d <= 366)) throw new RangeError(`dayOfYear for lead ${h} must be an integer 1 … 366`);
    doy[h] = d;
  }
  if (typeof input.dayOfYear === 'object' && input.dayOfYear.length !== H) throw new RangeError('dayOfYear must have one value per lead');
  if (window !== null && !hasDoy) throw new RangeError('a seasonal window needs dayOfYear');
  const shuffle = options.shuffle ?? true;
  const nTemplates = archive.templateStart.length;
  if (shuffle && (nTemplates === 0 || archive.templateLength < H)) {
    throw new RangeError(
      `Schaake shuffle needs templates of at least ${H} lead times; the archive has ${nTemplates} of length ${archive.templateLength} (use shuffle: false to skip)`,
    );
  }
  const probs = Float64Array.from(options.probs ?? DEFAULT_QUANTILE_PROBS);
  for (const p of probs) if (!(p >= 0 && p <= 1)) throw new RangeError(`quantile probability out of [0, 1]: ${p}`);
  const thresholds = Float64Array.from(options.thresholds ?? []);
  for (const t of thresholds) if (!Number.isFinite(t)) throw new RangeError('thresholds must be finite');
  if (options.k !== undefined) positiveInt(options.k, 'k');
  const kernel: NeighbourKernel = options.kernel ?? archive.neighbours?.kernel ?? 'lall-sharma';
  const kScale = options.kScale ?? archive.neighbours?.kScale ?? 1;
  if (!(kScale > 0 && Number.isFinite(kScale))) throw new RangeError('kScale must be a positive number');
  const kFor = (n: number): number => Math.min(n, options.k ?? Math.max(1, Math.round(kScale * defaultK(n))));

  const { predictor, dayOfYear: caseDoy, groupStart } = archive;
  // Issue-error strata: each member searches the stratum of its own issue error (the middle one
  // when the run gives none). Strata are fixed over the horizon.
  const S = archiveStrata(archive);
  const memberStratum = workspace.i32('memberStratum', nMM);
  const stratumUsed = new Uint8Array(S);
  if (input.issueError !== undefined && input.issueError.length !== nMM) throw new RangeError(`issueError must hold one value per model and member (${nMM})`);
  for (let mm = 0; mm < nMM; mm++) {
    const ie = input.issueError ? input.issueError[mm] : NaN;
    memberStratum[mm] = S === 1 ? 0 : Number.isFinite(ie) ? stratumOf(archive.issueErrorEdges, ie) : S >> 1;
    stratumUsed[memberStratum[mm]] = 1;
  }
  let maxGroup = 0;
  const nGroups = (leadFree ? 1 : archive.nLeads) * S;
  for (let g = 0; g < nGroups; g++) maxGroup = Math.max(maxGroup, groupStart[g + 1] - groupStart[g]);
  const kStride = Math.max(1, kFor(maxGroup));
  for (let h = 0; h < H; h++) {
    const lg = groupOfLead(h);
    for (let st = 0; st < S; st++) {
      if (stratumUsed[st] && groupStart[lg * S + st + 1] === groupStart[lg * S + st]) {
        throw new RangeError(S > 1 ? `the archive has no cases for lead ${lg} in issue-error stratum ${st}` : `the archive has no cases for lead ${lg}`);
      }
    }
  }

  // ---- transform of the members ------------------------------------------------------------
  const t = archive.transform;
  const kind = t.kind === 'none' ? 0 : t.kind === 'log' || t.lambda === 0 ? 1 : 2;
  const offset = t.kind === 'none' ? 0 : t.offset;
  const lambda = t.kind === 'boxcox' ? t.lambda : 1;
  if (kind === 2 && !(lambda > 0)) throw new RangeError('the stage supports Box–Cox with λ ≥ 0 only');
  // Transcendental work moved out of the per-sample loop: in log space the draw
  // exp(T(x) + e) − offset is computed as (x + offset)·exp(e) − offset, with exp(e) taken once per
  // archived case; tx holds x + offset and the candidate "errors" are the factors exp(e).
  const tx = workspace.f64('tx', H * nMM); // [lead·nMM + mm]
  for (let mm = 0; mm < nMM; mm++) {
    for (let h = 0; h < H; h++) {
      const x = members[mm * H + h];
      // Box–Cox: λ·T(x) + 1 = (x + offset)^λ, so a draw is (tx + λ·e)^(1/λ) − offset.
      tx[h * nMM + mm] = kind === 1 ? (x > 0 ? x : 0) + offset : kind === 2 ? lambda * forwardTransform(t, x) + 1 : forwardTransform(t, x);
    }
  }
  // Forecast-forcing paths: used when the archive has them and they reach the run's horizon.
  const paths = options.forcingPaths !== false && archive.forcingPaths && archive.forcingPaths.nLeads >= H ? archive.forcingPaths : null;
  let error = archive.error;
  // With a lead scale the drawn errors are scaled per lead, so their terms are made per lead from
  // the neighbours' raw errors (scaleTerms) instead of once per case here.
  const leadScale = paths ? undefined : archive.leadScale;
  if (kind !== 0 && !leadScale) {
    // Per-case terms prepared once per call: exp(e) in log space, λ·e in Box–Cox space.
    const terms = workspace.f64('errorTerm', error.length);
    if (kind === 1) for (let i = 0; i < error.length; i++) terms[i] = Math.exp(error[i]);
    else for (let i = 0; i < error.length; i++) terms[i] = lambda * error[i];
    error = terms;
  }

  // ---- candidates per (group, day of year) --------------------------------------------------
  // Candidates of the current (group, day) are copied between sentinels (−∞ first, +∞ last) so
  // the nearest-first walk needs no bounds checks.
  // With strata, each used stratum's candidates live in their own slice of cP/cE (stride maxGroup + 2).
  // Uniform kernel (without a lead scale, which needs each member's neighbours in hand): the k
  // nearest of a sorted 1-D predictor are a window of the candidates, found by binary search, and
  // the draws read the window in place (O(log n) per member and lead instead of a walk over k).
  // Which case each draw index lands on differs from the walk's nearest-first order, but every
  // one of the k is equally likely either way. A tie at the k-th distance takes the walk, whose
  // random choice among the tied cases is written to a spill slice after the candidates.
  const direct = kernel === 'uniform' && !leadScale && !options.walkNeighbours;
  const kPerLead = new Int32Array(H);
  const cStride = maxGroup + 2;
  const cPAll = workspace.f64('candPred', S * cStride);
  const spill = S * cStride;
  const cEAll = workspace.f64('candErr', spill + (direct ? nMM * kStride : 0));
  // Where each member's k neighbour errors start in `source`, nearest first unless direct.
  const source = direct ? cEAll : workspace.f64('nbErr', nMM * kStride);
  const nbBase = workspace.i32('nbBase', nMM);
  for (let mm = 0; mm < nMM; mm++) nbBase[mm] = direct ? spill + mm * kStride : mm * kStride;
  const nCandOf = new Int32Array(S);
  const cP = cPAll.subarray(0, cStride);
  const cE = cEAll.subarray(0, cStride);
  const tieIdx = workspace.i32('tieIdx', maxGroup + 2);
  let lastGroup = -1;
  let lastDoy = -1;
  let nCand = 0;
  const inWindow = new Uint8Array(367);
  // Lead-free archives with a seasonal window: the window's cases are filtered from a wider
  // superset (window + margin days around the superset's centre) while the centre stays within
  // `margin` of it, instead of from the whole archive each time. Any case within the window of
  // the current centre is within window + margin of the superset's centre (triangle inequality
  // on the circular year), and filtering keeps the archive's order, so the candidates are the
  // same as from a full scan. Used only when the superset is a real subset of the year.
  const margin = window !== null ? Math.max(2, Math.ceil(window / 2)) : 0;
  const useSuperset = leadFree && window !== null && window + margin < 182;
  const inSuper = useSuperset ? new Uint8Array(367) : inWindow;
  const sP = useSuperset ? workspace.f64('superPred', maxGroup) : cP;
  const sE = useSuperset ? workspace.f64('superErr', maxGroup) : cE;
  const sD = useSuperset ? workspace.u16('superDoy', maxGroup) : caseDoy;
  let superDoy = -1;
  let nSuper = 0;
  const cum = workspace.f64('cum', kStride);
  let cumK = -1;
  // Guide table (Chen & Asau 1974) for the kernel draw: guide[b] = first index whose cumulative
  // weight exceeds b/G of the total, G = 16k, so a draw rarely needs more than one comparison.
  const guide = workspace.i32('guide', 16 * kStride);

  // ---- random streams: members per draw, templates, ties -------------------------------------
  const rng = createPrng(options.seed, 0);
  const rngTies = createPrng(options.seed, 2);
  const slot = workspace.i32('slot', N);
  for (let j = 0; j < N; j++) slot[j] = j % nMM;
  for (let j = N - 1; j > 0; j--) {
    const r = rng.nextInt(j + 1);
    const s = slot[j];
    slot[j] = slot[r];
    slot[r] = s;
  }
  // Draws grouped by member (counting sort): the shuffle works within each member's draws.
  const memberStart = workspace.i32('memberStart', nMM + 1).fill(0, 0, nMM + 1);
  for (let j = 0; j < N; j++) memberStart[slot[j] + 1]++;
  for (let m = 0; m < nMM; m++) memberStart[m + 1] += memberStart[m];
  const byMember = workspace.i32('byMember', N);
  const fillPos = workspace.i32('fillPos', nMM);
  fillPos.set(memberStart.subarray(0, nMM));
  for (let j = 0; j < N; j++) byMember[fillPos[slot[j]]++] = j;

  const tBase = workspace.i32('tBase', N);
  let templateIndex: Int32Array | null = null;
  // A random permutation of the draws breaks ties between template ranks (tieOf[j] < 2^24).
  const tieOf = workspace.i32('tieOf', N);
  const drawOfTie = workspace.i32('drawOfTie', N);
  if (shuffle) {
    const rngT = createPrng(options.seed, 1);
    const elig = workspace.i32('elig', nTemplates);
    let E = 0;
    if (window !== null) {
      for (let i = 0; i < nTemplates; i++) {
        if (circularDayDistance(archive.templateDayOfYear[i], doy[0]) <= window) elig[E++] = i;
      }
    }
    if (E === 0) {
      for (let i = 0; i < nTemplates; i++) elig[i] = i;
      E = nTemplates;
    }
    const M = Math.min(N, E);
    for (let i = 0; i < M; i++) {
      // Partial Fisher–Yates: the first M entries become a uniform random selection.
      const r = i + rngT.nextInt(E - i);
      const tmp = elig[i];
      elig[i] = elig[r];
      elig[r] = tmp;
    }
    templateIndex = new Int32Array(N);
    for (let j = 0; j < N; j++) {
      templateIndex[j] = elig[j % M];
      tBase[j] = archive.templateStart[templateIndex[j]];
      drawOfTie[j] = j;
    }
    for (let j = N - 1; j > 0; j--) {
      const r = rngT.nextInt(j + 1);
      const s = drawOfTie[j];
      drawOfTie[j] = drawOfTie[r];
      drawOfTie[r] = s;
    }
    for (let p = 0; p < N; p++) tieOf[drawOfTie[p]] = p;
  }

  // The path each trajectory carries, and this lead's term of it per draw.
  const pathIndex = paths ? drawForcingPaths(paths, N, createPrng(options.seed, 3)) : null;
  const term = paths ? workspace.f64('pathTerm', N) : null;

  // ---- draws, marginals, shuffle --------------------------------------------------------------------
  const nP = probs.length;
  const nT = thresholds.length;
  const quantiles = new Float64Array(H * nP);
  const exceedance = new Float64Array(nT * H);
  const trajectories = options.keepTrajectories ? new Float64Array(N * H) : null;
  const trajMax = workspace.f64('trajMax', N).fill(-Infinity, 0, N);
  // Box–Cox draws stay in the working space b = (x + offset)^λ + λe, floored at offset^λ (flow 0):
  // the back-transform is increasing there, so sorting, ranks, maxima and threshold tests can all
  // be done on b, and only the values actually reported are back-transformed. Other spaces work on
  // flows directly. invLambdaOut = 0 marks flow space.
  const invLambdaOut = kind === 2 ? 1 / lambda : 0;
  const boxCoxFloor = kind === 2 ? Math.exp(Math.log(offset) * lambda) : 0; // offset^λ (0 when offset = 0)
  const workThresholds = Float64Array.from(thresholds, (th) =>
    kind !== 2 ? th : th < 0 ? -Infinity : Math.exp(Math.log(th + offset) * lambda),
  );
  const vals = workspace.f64('vals', N);
  const valsTmp = workspace.f64('valsTmp', N);
  const valsWords = new Uint32Array(vals.buffer, vals.byteOffset, 2 * vals.length);
  const tmpWords = new Uint32Array(valsTmp.buffer, valsTmp.byteOffset, 2 * valsTmp.length);
  const counts = workspace.i32('counts', 1024);
  const groupVals = workspace.f64('groupVals', N);
  const rankKeys = workspace.f64('rankKeys', N);
  // The draw stream continues in sampleLead on a copy of its state.
  const rngState = workspace.i32('rngState', 4);
  rngState.set(rng.state());
  const rank = archive.templateRank;
  // Largest possible rank: series length (lead-free) or number of issue rows (per-lead ranks).
  const maxRank = leadFree ? archive.templateValues.length : Math.ceil(archive.templateValues.length / archive.nLeads);
  if (maxRank * TIE_SPAN > Number.MAX_SAFE_INTEGER) throw new RangeError('archive template series too long for the shuffle keys');
  if (timings) timings.setupMs += lap();
  for (let h = 0; h < H; h++) {
    let k = kStride;
    if (S === 1) {
      const g = groupOfLead(h);
      const gs = groupStart[g];
      const ge = groupStart[g + 1];
      // The window's centre follows the lead's day of year in steps of a tenth of the window (at
      // least a day): rescanning the group for every day of a long daily horizon costs more than
      // the rest of the stage, and a shift of a few days in a ±60-day window changes little.
      if (g !== lastGroup || (window !== null && circularDayDistance(doy[h], lastDoy) >= Math.max(1, window / 10))) {
        nCand = 0;
        if (window !== null) {
          for (let d = 1; d <= 366; d++) inWindow[d] = circularDayDistance(d, doy[h]) <= window ? 1 : 0;
          if (useSuperset) {
            if (superDoy < 0 || circularDayDistance(doy[h], superDoy) > margin) {
              for (let d = 1; d <= 366; d++) inSuper[d] = circularDayDistance(d, doy[h]) <= window + margin ? 1 : 0;
              nSuper = gatherSuperset(predictor, error, caseDoy, gs, ge, inSuper, sP, sE, sD);
              superDoy = doy[h];
            }
            nCand = gatherInWindow(sP, sE, sD, 0, nSuper, inWindow, cP, cE);
          } else {
            nCand = gatherInWindow(predictor, error, caseDoy, gs, ge, inWindow, cP, cE);
          }
        }
        nCand = nCand || gatherAll(predictor, error, gs, ge, cP, cE);
        lastGroup = g;
        lastDoy = doy[h];
      }
      k = Math.min(kFor(nCand), kStride);
      for (let mm = 0; mm < nMM; mm++) {
        const x = members[mm * H + h];
        const a = direct ? nearestWindow(x, cP, nCand, k) : 0;
        if (a > 0) nbBase[mm] = a;
        else {
          nbBase[mm] = direct ? spill + mm * kStride : mm * kStride;
          nearestWithRandomTies(x, cP, cE, nCand, k, source, nbBase[mm], tieIdx, rngTies);
        }
      }
    } else {
      // Per stratum: the window's cases of this lead and stratum (all of them when the window holds none).
      if (window !== null) for (let d = 1; d <= 366; d++) inWindow[d] = circularDayDistance(d, doy[h]) <= window ? 1 : 0;
      for (let st = 0; st < S; st++) {
        if (!stratumUsed[st]) continue;
        const gs = groupStart[groupOfLead(h) * S + st];
        const ge = groupStart[groupOfLead(h) * S + st + 1];
        const p = cPAll.subarray(st * cStride, (st + 1) * cStride);
        const e = cEAll.subarray(st * cStride, (st + 1) * cStride);
        const nc = window !== null ? gatherInWindow(predictor, error, caseDoy, gs, ge, inWindow, p, e) : 0;
        nCandOf[st] = nc || gatherAll(predictor, error, gs, ge, p, e);
        k = Math.min(k, kFor(nCandOf[st]));
      }
      for (let mm = 0; mm < nMM; mm++) {
        const st = memberStratum[mm];
        const p = cPAll.subarray(st * cStride, (st + 1) * cStride);
        const x = members[mm * H + h];
        const a = direct ? nearestWindow(x, p, nCandOf[st], k) : 0;
        if (a > 0) nbBase[mm] = st * cStride + a;
        else {
          nbBase[mm] = direct ? spill + mm * kStride : mm * kStride;
          nearestWithRandomTies(x, p, cEAll.subarray(st * cStride, (st + 1) * cStride), nCandOf[st], k, source, nbBase[mm], tieIdx, rngTies);
        }
      }
    }
    kPerLead[h] = k;
    if (timings) timings.knnMs += lap();
    if (leadScale) scaleTerms(kind, lambda, leadScale[Math.min(leadFree ? h : groupOfLead(h), leadScale.length - 1)], source, nMM, kStride, k);
    if (k !== cumK) {
      kernelCumulative(kernel, k, cum);
      const cTop = cum[k - 1];
      const G = 16 * k;
      let j = 0;
      for (let bIdx = 0; bIdx < G; bIdx++) {
        // A hair below b/G so rounding can only start the search early, never late.
        while (cum[j] <= (bIdx / G) * cTop * (1 - 1e-12)) j++;
        guide[bIdx] = j;
      }
      cumK = k;
    }
    sampleLead(kind, rngState, N, slot, 16 * k, cum[k - 1], cum, guide, tx, h * nMM, source, nbBase, vals, offset, boxCoxFloor);
    if (timings) timings.samplingMs += lap();
    // This lead's path terms per draw, in the form sampleLead adds errors: exp(δ), λ·δ or δ.
    if (paths && pathIndex && term) {
      const Hp = paths.nLeads;
      for (let j = 0; j < N; j++) {
        const d = paths.values[pathIndex[j] * Hp + h];
        term[j] = kind === 1 ? Math.exp(d) : kind === 2 ? lambda * d : d;
      }
    }
    if (shuffle) {
      shuffleWithinMembers(nMM, memberStart, byMember, vals, rank, tBase, h, tieOf, drawOfTie, maxRank, rngTies, groupVals, rankKeys, trajMax, trajectories, H, invLambdaOut, offset, term, kind, boxCoxFloor);
    } else {
      for (let j = 0; j < N; j++) {
        const v = term ? withPath(vals[j], term[j], kind, offset, boxCoxFloor) : vals[j];
        vals[j] = v;
        if (v > trajMax[j]) trajMax[j] = v;
        if (trajectories) trajectories[j * H + h] = invLambdaOut ? boxCoxFlow(v, invLambdaOut, offset) : v;
      }
    }
    if (timings) timings.shuffleMs += lap();
    sortNonNegative(vals, N, valsTmp, valsWords, tmpWords, counts);
    for (let q = 0; q < nP; q++) {
      quantiles[h * nP + q] = invLambdaOut ? boxCoxQuantile(vals, probs[q], N, invLambdaOut, offset) : quantileSorted(vals, probs[q], 0, N);
    }
    for (let ti = 0; ti < nT; ti++) exceedance[ti * H + h] = countAboveSorted(vals, workThresholds[ti], 0, N) / N;
    if (timings) timings.summaryMs += lap();
  }

  const exceedanceAnyTime = new Float64Array(nT);
  const firstLikelyLead: (number | null)[] = [];
  for (let ti = 0; ti < nT; ti++) {
    let c = 0;
    for (let j = 0; j < N; j++) if (trajMax[j] > workThresholds[ti]) c++;
    exceedanceAnyTime[ti] = c / N;
    let first: number | null = null;
    for (let h = 0; h < H; h++) {
      if (exceedance[ti * H + h] > 0.5) {
        first = h;
        break;
      }
    }
    firstLikelyLead.push(first);
  }

  if (timings) timings.summaryMs += lap();
  return {
    nLeads: H,
    nDraws: N,
    probs,
    quantiles,
    thresholds,
    exceedance,
    exceedanceStandardError: Float64Array.from(exceedance, (p) => monteCarloStandardError(p, N)),
    exceedanceAnyTime,
    exceedanceAnyTimeStandardError: Float64Array.from(exceedanceAnyTime, (p) => monteCarloStandardError(p, N)),
    firstLikelyLead,
    kPerLead,
    kernel,
    memberIndex: Int32Array.from(slot.subarray(0, N)),
    trajectories,
    templateIndex,
    pathIndex,
  };
}

/** A working value with a forcing path's term added (clipped at flow 0): see sampleLead's forms. */
function withPath(v: number, term: number, kind: number, offset: number, floor: number): number {
  if (kind === 1) {
    const w = (v + offset) * term - offset;
    return w > 0 ? w : 0;
  }
  if (kind === 0) {
    const w = v + term;
    return w > 0 ? w : 0;
  }
  const b = v + term;
  return b > floor ? b : floor;
}

/**
 * Schaake shuffle of one lead's draws within each member: the draws of member m (byMember
 * memberStart[m] … memberStart[m+1]−1) take that member's values in the rank order of their
 * templates' values at lead h. Keys are rank·2^24 + the draw's place in a random permutation, so
 * equal ranks (reused templates) fall in random order; a missing template value gets a random rank.
 * With forcing-path terms, each draw's shuffled value gets its own path's term and is written back
 * to vals, which then hold the final values for the marginals.
 */
function shuffleWithinMembers(
  nMM: number,
  memberStart: Int32Array,
  byMember: Int32Array,
  vals: Float64Array,
  rank: Uint32Array,
  tBase: Int32Array,
  h: number,
  tieOf: Int32Array,
  drawOfTie: Int32Array,
  maxRank: number,
  rng: Prng,
  groupVals: Float64Array,
  rankKeys: Float64Array,
  trajMax: Float64Array,
  trajectories: Float64Array | null,
  H: number,
  invLambdaOut: number,
  offset: number,
  term: Float64Array | null,
  kind: number,
  floor: number,
): void {
  for (let m = 0; m < nMM; m++) {
    const s = memberStart[m];
    const e = memberStart[m + 1];
    if (e === s) continue;
    for (let p = s; p < e; p++) {
      const j = byMember[p];
      groupVals[p] = vals[j];
      const rk = rank[tBase[j] + h];
      rankKeys[p] = (rk === MISSING_RANK ? rng.nextInt(maxRank) : rk) * TIE_SPAN + tieOf[j];
    }
    sortRange(groupVals, s, e);
    sortRange(rankKeys, s, e);
    for (let p = s; p < e; p++) {
      // The key's low 24 bits without `%`: keys pass 2^31, where `%` on doubles is a call to fmod.
      const key = rankKeys[p];
      const j = drawOfTie[key - Math.floor(key * INV_TIE_SPAN) * TIE_SPAN];
      // With forcing paths, the shuffled value plus draw j's path term, kept for the marginals.
      const v = term ? (vals[j] = withPath(groupVals[p], term[j], kind, offset, floor)) : groupVals[p];
      if (v > trajMax[j]) trajMax[j] = v;
      if (trajectories !== null) trajectories[j * H + h] = invLambdaOut ? boxCoxFlow(v, invLambdaOut, offset) : v;
    }
  }
}

/** Below this many values an insertion sort beats a call of TypedArray.prototype.sort on a subarray. */
const INSERTION_SORT_MAX = 48;

/**
 * Sorts a[s … e−1] ascending in place (values are finite and never −0, so the order equals
 * TypedArray.prototype.sort's). A member's draws at one lead are a few dozen values: sorting
 * them in place avoids a subarray object and a call into the runtime per member and lead.
 */
function sortRange(a: Float64Array, s: number, e: number): void {
  if (e - s > INSERTION_SORT_MAX) {
    a.subarray(s, e).sort();
    return;
  }
  for (let i = s + 1; i < e; i++) {
    const v = a[i];
    let j = i - 1;
    while (j >= s && a[j] > v) {
      a[j + 1] = a[j];
      j--;
    }
    a[j + 1] = v;
  }
}

/**
 * Turns one lead's neighbour errors e (transform space) into the terms sampleLead adds, scaled by
 * the lead's factor g: g·e (additive), exp(g·e) (log), λ·g·e (Box–Cox).
 */
/**
 * Widens each member's k neighbour errors by g about their mean, m + g·(e − m): the forecast-forcing
 * error they lack adds spread, not bias, so the neighbourhood's centre stays where it is.
 */
function scaleTerms(kind: number, lambda: number, g: number, nbErr: Float64Array, nMM: number, kStride: number, k: number): void {
  for (let mm = 0; mm < nMM; mm++) {
    const base = mm * kStride;
    let m = 0;
    for (let j = 0; j < k; j++) m += nbErr[base + j];
    m /= k;
    for (let j = 0; j < k; j++) {
      const e = m + g * (nbErr[base + j] - m);
      nbErr[base + j] = kind === 1 ? Math.exp(e) : kind === 2 ? lambda * e : e;
    }
  }
}

/** Copies every case gs … ge−1 to cP/cE[1 …] and sets the sentinels; returns how many. */
function gatherAll(predictor: Float64Array, error: Float64Array, gs: number, ge: number, cP: Float64Array, cE: Float64Array): number {
  let n = 0;
  for (let i = gs; i < ge; i++) {
    n++;
    cP[n] = predictor[i];
    cE[n] = error[i];
  }
  return withSentinels(cP, n);
}

/** Puts −∞ before and +∞ after the n candidates in cP[1 … n]; returns n. */
function withSentinels(cP: Float64Array, n: number): number {
  cP[0] = -Infinity;
  cP[n + 1] = Infinity;
  return n;
}

/**
 * Copies the cases gs … ge−1 whose day of year is marked in inWindow to cP/cE[1 …], keeping
 * their order, and sets the sentinels; returns how many. Without a branch: every case is written to
 * the next free slot and the count moves only when it is inside (inside or not is unpredictable in
 * predictor order). cP/cE need room for ge − gs + 2 values.
 */
function gatherInWindow(
  predictor: Float64Array,
  error: Float64Array,
  caseDoy: Uint16Array,
  gs: number,
  ge: number,
  inWindow: Uint8Array,
  cP: Float64Array,
  cE: Float64Array,
): number {
  let n = 0;
  for (let i = gs; i < ge; i++) {
    cP[n + 1] = predictor[i];
    cE[n + 1] = error[i];
    n += inWindow[caseDoy[i]];
  }
  return withSentinels(cP, n);
}

/**
 * As gatherInWindow, into sP/sE/sD[0 …] with each case's day of year (the superset later
 * windows are filtered from). sP/sE/sD need room for ge − gs values.
 */
function gatherSuperset(
  predictor: Float64Array,
  error: Float64Array,
  caseDoy: Uint16Array,
  gs: number,
  ge: number,
  inSuper: Uint8Array,
  sP: Float64Array,
  sE: Float64Array,
  sD: Uint16Array,
): number {
  let n = 0;
  for (let i = gs; i < ge; i++) {
    const d = caseDoy[i];
    sP[n] = predictor[i];
    sE[n] = error[i];
    sD[n] = d;
    n += inSuper[d];
  }
  return n;
}

/**
 * One lead's draws: per draw j, its member's kernel-chosen neighbour (Lall & Sharma: first index
 * whose cumulative 1/j sum exceeds u·H_k, started from the guide table) combined with the member:
 *   kind 0 (additive): vals[j] = max(0, tx + e)
 *   kind 1 (log):      vals[j] = max(0, tx·exp(e) − offset), tx = x + offset, source holds exp(e)
 *   kind 2 (Box–Cox):  vals[j] = max(floor, tx + λe), tx = (x + offset)^λ, source holds λe (see boxCoxFlow)
 * Member mm's neighbour of rank idx is source[nbBase[mm] + idx].
 * The uniform u is xoshiro128**'s next output / 2^32, exactly Prng.nextUniform32, stepped here on
 * local copies of the state (read from and written back to `state`): a method call per draw keeps
 * the four state words in memory and this loop waiting on them.
 */
function sampleLead(
  kind: number,
  state: Int32Array,
  N: number,
  slot: Int32Array,
  G: number,
  cTop: number,
  cum: Float64Array,
  guide: Int32Array,
  tx: Float64Array,
  txBase: number,
  source: Float64Array,
  nbBase: Int32Array,
  vals: Float64Array,
  offset: number,
  floor: number,
): void {
  let s0 = state[0];
  let s1 = state[1];
  let s2 = state[2];
  let s3 = state[3];
  for (let j = 0; j < N; j++) {
    // xoshiro128** step, as Prng.nextUint32.
    const m5 = Math.imul(s1, 5);
    const r = Math.imul((m5 << 7) | (m5 >>> 25), 9);
    const t = s1 << 9;
    s2 ^= s0;
    s3 ^= s1;
    s1 ^= s2;
    s0 ^= s3;
    s2 ^= t;
    s3 = (s3 << 11) | (s3 >>> 21);
    const u = (r >>> 0) * 2.3283064365386963e-10;
    const target = u * cTop;
    let idx = guide[Math.floor(u * G)];
    while (cum[idx] <= target) idx++;
    const mm = slot[j];
    const x = tx[txBase + mm];
    const e = source[nbBase[mm] + idx];
    if (kind === 1) {
      const v = x * e - offset;
      vals[j] = v > 0 ? v : 0;
    } else if (kind === 0) {
      const v = x + e;
      vals[j] = v > 0 ? v : 0;
    } else {
      const b = x + e;
      vals[j] = b > floor ? b : floor;
    }
  }
  state[0] = s0;
  state[1] = s1;
  state[2] = s2;
  state[3] = s3;
}

/** Flow of a Box–Cox working value b ≥ offset^λ: b^(1/λ) − offset, as exp(ln(b)/λ), ≥ 0. */
function boxCoxFlow(b: number, invLambda: number, offset: number): number {
  const v = Math.exp(Math.log(b) * invLambda) - offset;
  return v > 0 ? v : 0;
}

/** Definition-7 quantile in flow space from ascending working values (two back-transforms). */
function boxCoxQuantile(sorted: Float64Array, p: number, n: number, invLambda: number, offset: number): number {
  const hq = (n - 1) * p;
  const lo = Math.floor(hq);
  const a = boxCoxFlow(sorted[lo], invLambda, offset);
  if (lo >= n - 1) return a;
  const f = hq - lo;
  return f === 0 ? a : a + f * (boxCoxFlow(sorted[lo + 1], invLambda, offset) - a);
}
