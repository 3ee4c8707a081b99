import type { ErrorArchive } from './error-archive.ts';
import { countAboveSorted } from './exceedance.ts';
import { circularDayDistance, defaultK, harmonicCumulative } from './knn.ts';
import { createPrng } from './prng.ts';
import { quantileSorted } from './quantile.ts';
import { radixOrder, sortNonNegative, sortPackedKeys } from './radix-sort.ts';
import { forwardTransform } from './error-transform.ts';

/**
 * Stochastic error stage: turns corrected members into N coherent trajectories carrying the
 * total predictive uncertainty (kNN error resampling, Lall & Sharma 1996; Schaake shuffle,
 * Clark et al. 2004). The same function serves raw members with an archive of raw errors.
 *
 * Per call:
 *  1. For every (model, member, lead), the k archived cases nearest in predictor value (same
 *     lead group; optionally within ±seasonalWindowDays of the lead's valid day of year,
 *     circular) are looked up once; k = round(√n) of the candidates unless given.
 *  2. Each draw j picks one (model, member) uniformly; at each lead it picks one of that
 *     member's k neighbours with the 1/j kernel and adds its error in the archive's transform
 *     space: value = max(0, T⁻¹(T(member) + error)).
 *  3. Per lead the N values are sorted (quantiles and exceedance come from these marginals),
 *     then reordered across draws so their ranks follow N historical error trajectories
 *     (Schaake shuffle). Templates: those whose first day of year is within the seasonal window
 *     of lead 0's day of year (all templates if the window is unset or holds none); N distinct
 *     ones are drawn at random when there are at least N, otherwise all are used in a random
 *     order and reused cyclically (draw j follows template j mod E; ties between copies are
 *     broken by draw index). Template choice uses its own random stream, so switching the
 *     shuffle off leaves the marginals unchanged.
 *  Any-time exceedance comes from the maxima of the shuffled trajectories. Note the shuffle
 *  imposes the templates' rank dependence on the final values; each lead's values are unchanged.
 *
 * Everything is determined by the seed. Large buffers live in a reusable workspace; nothing is
 * allocated per sample.
 *
 * Caller's side of the contract: lead index h of the forecast uses the archive's lead h
 * (reforecast archives); the archive's time step equals the forecast's (lead-free templates are
 * windows of consecutive archive steps); a workspace serves one call at a time (one per worker).
 * Known property of the method: the 1/j kernel leans on the nearest few cases (effective sample
 * 1/Σw_j² ≈ 16 at k = 100), so single-case bands come out slightly narrow and central-interval
 * coverage a few points under nominal (tests: ~0.83 for a nominal 0.90 at k = 100); a larger k
 * moves it towards nominal at the cost of locality.
 */

export const DEFAULT_QUANTILE_PROBS: readonly number[] = [0.05, 0.1, 0.25, 0.5, 0.75, 0.9, 0.95];

export interface StochasticInput {
  /** Corrected members, layout [(model·nMembers + member)·nLeads + lead], m³/s. */
  members: ArrayLike<number>;
  /** Residual models bundled (default 1). */
  nModels?: number;
  nMembers: number;
  nLeads: number;
  /** Valid-time day of year (1 … 366) per lead, or one value for all leads. Needed for seasonal windows. */
  dayOfYear?: ArrayLike<number> | number;
}

export interface StochasticOptions {
  seed: number;
  /** Trajectories to draw (default 1000). */
  nDraws?: number;
  /** Fixed neighbour count; default round(√n) of the candidate cases at each lead. */
  k?: number;
  /** Use only archived cases (and templates) within ± this many days of year; unset = all. */
  seasonalWindowDays?: number | null;
  /** Quantile probabilities (default 0.05, 0.1, 0.25, 0.5, 0.75, 0.9, 0.95). */
  probs?: ArrayLike<number>;
  /** Flow thresholds for exceedance (event: value > threshold). */
  thresholds?: ArrayLike<number>;
  /** Apply the Schaake shuffle (default true). false = errors independent across leads. */
  shuffle?: boolean;
  /** Return the N × nLeads trajectories (default false). */
  keepTrajectories?: boolean;
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
  /** P(threshold exceeded at any lead of the horizon), from the shuffled trajectories. */
  exceedanceAnyTime: Float64Array;
  /** Per threshold, the first lead index with exceedance > 0.5, or null. */
  firstLikelyLead: (number | null)[];
  /** Neighbour count used at each lead. */
  kPerLead: Int32Array;
  /** Trajectories [draw·nLeads + lead] when keepTrajectories, else null. */
  trajectories: Float64Array | null;
  /** Archive template index each trajectory followed (null without shuffle). */
  templateIndex: Int32Array | null;
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

export function runStochasticStage(
  archive: ErrorArchive,
  input: StochasticInput,
  options: StochasticOptions,
  workspace: StochasticWorkspace = new StochasticWorkspace(),
): StochasticResult {
  // ---- validation ---------------------------------------------------------------------------
  const nModels = positiveInt(input.nModels ?? 1, 'nModels');
  const nMembers = positiveInt(input.nMembers, 'nMembers');
  const H = positiveInt(input.nLeads, 'nLeads');
  const N = positiveInt(options.nDraws ?? 1000, 'nDraws');
  if (N > 1 << 24) throw new RangeError('nDraws must be at most 2^24');
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

  const { predictor, dayOfYear: caseDoy, groupStart } = archive;
  let maxGroup = 0;
  const nGroups = leadFree ? 1 : archive.nLeads;
  for (let g = 0; g < nGroups; g++) maxGroup = Math.max(maxGroup, groupStart[g + 1] - groupStart[g]);
  const kStride = Math.max(1, options.k !== undefined ? Math.min(options.k, maxGroup) : defaultK(maxGroup));

  // ---- transform of the members ------------------------------------------------------------
  const t = archive.transform;
  const kind = t.kind === 'none' ? 0 : t.kind === 'log' || t.lambda === 0 ? 1 : 2;
  const offset = t.kind === 'none' ? 0 : t.offset;
  const lambda = t.kind === 'boxcox' ? t.lambda : 1;
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

  let error = archive.error;
  if (kind !== 0) {
    // Per-case terms prepared once per call: exp(e) in log space, λ·e in Box–Cox space.
    const terms = workspace.f64('errorTerm', error.length);
    if (kind === 1) for (let i = 0; i < error.length; i++) terms[i] = Math.exp(error[i]);
    else for (let i = 0; i < error.length; i++) terms[i] = lambda * error[i];
    error = terms;
  }

  // ---- neighbours: once per (lead, model·member), searched lead by lead in the draw loop ------
  // Candidates of the current (group, day) are copied between sentinels (−∞ first, +∞ last) so
  // the nearest-first walk needs no bounds checks. One lead's neighbours at a time: they are read
  // right after they are written, so they stay in cache (a whole horizon's table runs to MBs).
  for (let h = 0; h < H; h++) {
    const g = leadFree ? 0 : h;
    if (groupStart[g + 1] === groupStart[g]) throw new RangeError(`the archive has no cases for lead ${h}`);
  }
  const nbErr = workspace.f64('nbErr', nMM * kStride); // [mm·kStride + rank], current lead
  const kPerLead = new Int32Array(H);
  const cP = workspace.f64('candPred', maxGroup + 2);
  const cE = workspace.f64('candErr', maxGroup + 2);
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
  const cum: Float64Array = harmonicCumulative(kStride, workspace.f64('cum', kStride));
  // Guide table (Chen & Asau 1974) for the kernel draw: guide[b] = first index whose cumulative
  // weight exceeds b/G of the total, G = 16k, so a draw rarely needs more than one comparison.
  const guide = workspace.i32('guide', 16 * kStride);
  let guideK = -1;

  // ---- random streams, member per draw, templates ------------------------------------------------
  const rng = createPrng(options.seed, 0);
  const slot = workspace.i32('slot', N);
  for (let j = 0; j < N; j++) slot[j] = Math.floor(rng.nextUniform32() * nMM);

  const tBase = workspace.i32('tBase', N);
  let templateIndex: Int32Array | null = null;
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
    }
  }

  // ---- draws, marginals, shuffle --------------------------------------------------------------------
  const nP = probs.length;
  const nT = thresholds.length;
  const quantiles = new Float64Array(H * nP);
  const exceedance = new Float64Array(nT * H);
  const trajectories = options.keepTrajectories ? new Float64Array(N * H) : null;
  const trajMax = workspace.f64('trajMax', N).fill(-Infinity, 0, N);
  // Box–Cox draws stay in the working space b = (x + offset)^λ + λe, floored at offset^λ (flow 0):
  // the back-transform is increasing there, so sorting, ranks, maxima and threshold tests can all
  // be done on b, and only the values actually reported are back-transformed (no exp/log per
  // sample). Other spaces work on flows directly. invLambdaOut = 0 marks flow space.
  const invLambdaOut = kind === 2 ? 1 / lambda : 0;
  const boxCoxFloor = kind === 2 ? Math.exp(Math.log(offset) * lambda) : 0; // offset^λ (0 when offset = 0)
  const workThresholds = Float64Array.from(thresholds, (t) =>
    kind !== 2 ? t : t < 0 ? -Infinity : Math.exp(Math.log(t + offset) * lambda),
  );
  const vals = workspace.f64('vals', N);
  const valsTmp = workspace.f64('valsTmp', N);
  const valsWords = new Uint32Array(vals.buffer, vals.byteOffset, 2 * vals.length);
  const tmpWords = new Uint32Array(valsTmp.buffer, valsTmp.byteOffset, 2 * valsTmp.length);
  const counts = workspace.i32('counts', 1024);
  const keys = workspace.u32('keys', N);
  const keysTmp = workspace.u32('keysTmp', N);
  const order = workspace.i32('order', N);
  const orderTmp = workspace.i32('orderTmp', N);
  // The draw stream continues in sampleLead on a copy of its state (rng is not used after this).
  const rngState = workspace.i32('rngState', 4);
  rngState.set(rng.state());
  const rank = archive.templateRank;
  // Largest possible rank: series length (lead-free) or number of issue rows (per-lead ranks).
  const maxRank = leadFree ? archive.templateValues.length : Math.ceil(archive.templateValues.length / archive.nLeads);
  const rankBits = 32 - Math.clz32(Math.max(1, maxRank));
  // When rank and draw index fit in 32 bits together, sort (rank << drawBits | draw) directly.
  const drawBits = 32 - Math.clz32(Math.max(1, N - 1));
  const packed = rankBits + drawBits <= 32;
  for (let h = 0; h < H; h++) {
    const g = leadFree ? 0 : h;
    const gs = groupStart[g];
    const ge = groupStart[g + 1];
    // The window's centre follows the lead's day of year in steps of a tenth of the window (at
    // least a day): rescanning the group for every day of a long daily horizon costs more than
    // the rest of the stage, and a shift of a few days in a ±60-day window changes little.
    if (g !== lastGroup || (window !== null && circularDayDistance(doy[h], lastDoy) >= Math.max(1, window / 10))) {
      nCand = 0;
      if (window !== null) {
        // Which days of year are inside the window, looked up per case instead of computed:
        // the scan runs over every case of the group for each new day.
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
      // No window, or an empty one: the whole lead group.
      if (nCand === 0) {
        for (let i = gs; i < ge; i++) {
          nCand++;
          cP[nCand] = predictor[i];
          cE[nCand] = error[i];
        }
      }
      cP[0] = -Infinity;
      cP[nCand + 1] = Infinity;
      lastGroup = g;
      lastDoy = doy[h];
    }
    const k = Math.min(options.k ?? defaultK(nCand), nCand, kStride);
    kPerLead[h] = k;
    nearestPerMember(members, H, h, nMM, cP, cE, nCand, k, nbErr, 0, kStride);
    const cTop = cum[k - 1];
    const G = 16 * k;
    if (k !== guideK) {
      let j = 0;
      for (let bIdx = 0; bIdx < G; bIdx++) {
        // A hair below b/G so rounding can only start the search early, never late.
        while (cum[j] <= (bIdx / G) * cTop * (1 - 1e-12)) j++;
        guide[bIdx] = j;
      }
      guideK = k;
    }
    sampleLead(kind, rngState, N, slot, G, cTop, cum, guide, tx, h * nMM, nbErr, kStride, vals, offset, boxCoxFloor);
    if (!shuffle) {
      for (let j = 0; j < N; j++) {
        const v = vals[j];
        if (v > trajMax[j]) trajMax[j] = v;
        if (trajectories) trajectories[j * H + h] = invLambdaOut ? boxCoxFlow(v, invLambdaOut, offset) : v;
      }
    }
    sortNonNegative(vals, N, valsTmp, valsWords, tmpWords, counts);
    const sorted = vals;
    for (let q = 0; q < nP; q++) {
      quantiles[h * nP + q] = invLambdaOut ? boxCoxQuantile(sorted, probs[q], N, invLambdaOut, offset) : quantileSorted(sorted, probs[q], 0, N);
    }
    for (let ti = 0; ti < nT; ti++) exceedance[ti * H + h] = countAboveSorted(sorted, workThresholds[ti], 0, N) / N;
    if (shuffle) {
      // Rank order of this lead's template values (ties by draw index).
      if (packed) {
        for (let j = 0; j < N; j++) keys[j] = ((rank[tBase[j] + h] << drawBits) | j) >>> 0;
        sortPackedKeys(keys, N, drawBits, drawBits + rankBits, keysTmp, counts);
        assignByPackedRank(N, keys, (1 << drawBits) - 1, vals, trajMax, trajectories, H, h, invLambdaOut, offset);
      } else {
        for (let j = 0; j < N; j++) keys[j] = rank[tBase[j] + h];
        radixOrder(keys, N, rankBits, order, keysTmp, orderTmp, counts);
        assignByRank(N, order, vals, trajMax, trajectories, H, h, invLambdaOut, offset);
      }
    }
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

  return {
    nLeads: H,
    nDraws: N,
    probs,
    quantiles,
    thresholds,
    exceedance,
    exceedanceAnyTime,
    firstLikelyLead,
    kPerLead,
    trajectories,
    templateIndex,
  };
}

/**
 * Copies the cases gs … ge−1 whose day of year is marked in inWindow to cP/cE[1 …], keeping
 * their order; returns how many. Without a branch: every case is written to the next free slot
 * and the count moves only when it is inside (inside or not is unpredictable in predictor order).
 * cP/cE need room for ge − gs + 2 values.
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
  return n;
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
 * Nearest-first neighbour errors of every member at lead h. Candidates sit between sentinels
 * (cP[0] = −∞, cP[nCand + 1] = +∞), so the walk needs no bounds checks. Members are walked in
 * pairs: the two independent dependency chains overlap in the CPU (≈ 25 % faster).
 */
function nearestPerMember(
  members: ArrayLike<number>,
  H: number,
  h: number,
  nMM: number,
  cP: Float64Array,
  cE: Float64Array,
  nCand: number,
  k: number,
  out: Float64Array,
  outBase: number,
  kStride: number,
): void {
  let mm = 0;
  for (; mm + 1 < nMM; mm += 2) {
    const x = members[mm * H + h];
    const y = members[(mm + 1) * H + h];
    // Branch-free binary searches: each base ends on the last candidate below its value.
    let bx = 0;
    let by = 0;
    let len = nCand + 2;
    while (len > 1) {
      const half = len >>> 1;
      bx += +(cP[bx + half] < x) * half;
      by += +(cP[by + half] < y) * half;
      len -= half;
    }
    // Walk outwards, nearest first, equal distances taking the lower predictor. Written without
    // branches: the left/right choice is unpredictable and mispredictions cost more.
    let lx = bx;
    let rx = bx + 1;
    let ly = by;
    let ry = by + 1;
    const ox = outBase + mm * kStride;
    const oy = ox + kStride;
    for (let j = 0; j < k; j++) {
      const tx = +(x - cP[lx] <= cP[rx] - x);
      const ty = +(y - cP[ly] <= cP[ry] - y);
      out[ox + j] = cE[rx + tx * (lx - rx)];
      out[oy + j] = cE[ry + ty * (ly - ry)];
      lx -= tx;
      rx += 1 - tx;
      ly -= ty;
      ry += 1 - ty;
    }
  }
  if (mm < nMM) {
    const x = members[mm * H + h];
    let bx = 0;
    let len = nCand + 2;
    while (len > 1) {
      const half = len >>> 1;
      bx += +(cP[bx + half] < x) * half;
      len -= half;
    }
    let lx = bx;
    let rx = bx + 1;
    const ox = outBase + mm * kStride;
    for (let j = 0; j < k; j++) {
      const tx = +(x - cP[lx] <= cP[rx] - x);
      out[ox + j] = cE[rx + tx * (lx - rx)];
      lx -= tx;
      rx += 1 - tx;
    }
  }
}

/**
 * One lead's draws: per draw j, its member's kernel-chosen neighbour (Lall & Sharma: first index
 * whose cumulative 1/j sum exceeds u·H_k, started from the guide table) combined with the member:
 *   kind 0 (additive): vals[j] = max(0, tx + e)
 *   kind 1 (log):      vals[j] = max(0, tx·exp(e) − offset), tx = x + offset, nbErr holds exp(e)
 *   kind 2 (Box–Cox):  vals[j] = max(floor, tx + λe), tx = (x + offset)^λ, nbErr holds λe (see boxCoxFlow)
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
  nbErr: Float64Array,
  kStride: number,
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
    const e = nbErr[mm * kStride + idx];
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

/** Schaake assignment: the draw whose template ranks p-th receives the p-th smallest value. */
function assignByRank(
  N: number,
  order: Int32Array,
  sorted: Float64Array,
  trajMax: Float64Array,
  trajectories: Float64Array | null,
  H: number,
  h: number,
  invLambdaOut: number,
  offset: number,
): void {
  for (let p = 0; p < N; p++) {
    const j = order[p];
    const v = sorted[p];
    if (v > trajMax[j]) trajMax[j] = v;
    if (trajectories !== null) trajectories[j * H + h] = invLambdaOut ? boxCoxFlow(v, invLambdaOut, offset) : v;
  }
}

/** As assignByRank, reading the draw index from the low bits of the sorted packed keys. */
function assignByPackedRank(
  N: number,
  keys: Uint32Array,
  mask: number,
  sorted: Float64Array,
  trajMax: Float64Array,
  trajectories: Float64Array | null,
  H: number,
  h: number,
  invLambdaOut: number,
  offset: number,
): void {
  for (let p = 0; p < N; p++) {
    const j = keys[p] & mask;
    const v = sorted[p];
    if (v > trajMax[j]) trajMax[j] = v;
    if (trajectories !== null) trajectories[j * H + h] = invLambdaOut ? boxCoxFlow(v, invLambdaOut, offset) : v;
  }
}
