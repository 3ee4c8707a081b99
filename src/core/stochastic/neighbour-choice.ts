import { alphaIndex } from '../scores/alpha-index.ts';
import { ascendingOrder, crpsWeighted } from '../scores/crps.ts';
import type { NeighbourSettings } from './error-archive.ts';
import { forwardTransform, type ErrorTransform } from './error-transform.ts';
import { defaultK, kernelCumulative, nearestSorted, NEIGHBOUR_KERNELS } from './knn.ts';
import { createPrng } from '../prng.ts';

/**
 * Chooses the stochastic stage's neighbour kernel and k on held-out errors: for each held-out case
 * (predictor, error) the k nearest cases of a training archive, weighted by the kernel, form a
 * predictive distribution of the error; its PIT (randomised where the CDF jumps) and CRPS are
 * scored. A kernel that leans on too few neighbours gives bands that are too narrow (a U-shaped
 * PIT); one that takes too many forgets the flow dependence (a worse CRPS).
 *
 * Rule (our own): the lowest mean CRPS among the settings whose alpha reliability index (Renard et
 * al. 2010) is within ALPHA_SLACK of the best one — reliability first, then sharpness.
 */

export interface HeldOutErrors {
  predictor: ArrayLike<number>;
  /** Error in the archive's transform space. */
  error: ArrayLike<number>;
}

export interface NeighbourScore extends NeighbourSettings {
  alpha: number;
  crps: number;
  /** Share of held-out errors inside the central 90 % interval of their neighbours. */
  coverage90: number;
  k: number;
  cases: number;
}

export const KSCALE_CANDIDATES: readonly number[] = [0.5, 1, 2, 4, 8];
export const ALPHA_SLACK = 0.02;

/** Cases to search, ascending by predictor (a lead-free archive's cases qualify). */
export interface SortedCases {
  predictor: Float64Array;
  error: Float64Array;
}

export function scoreNeighbourSettings(
  train: SortedCases,
  heldOut: HeldOutErrors,
  candidates: NeighbourSettings[] = NEIGHBOUR_KERNELS.flatMap((kernel) => KSCALE_CANDIDATES.map((kScale) => ({ kernel, kScale }))),
  seed = 1,
): NeighbourScore[] {
  const n = train.predictor.length;
  const m = heldOut.predictor.length;
  if (n === 0 || m === 0) throw new RangeError('both the training archive and the held-out errors need cases');
  if (heldOut.error.length !== m) throw new RangeError('held-out predictor and error lengths differ');
  // Every candidate's neighbours are the first k of one nearest-first walk (the walk does not
  // depend on k), so each case is searched once and sorted once per distinct k.
  const ks = candidates.map(({ kScale }) => Math.min(n, Math.max(1, Math.round(kScale * defaultK(n)))));
  const kMax = Math.max(...ks);
  const weights = candidates.map(({ kernel }, c) => {
    const cum = kernelCumulative(kernel, ks[c]);
    return { cum, w: Float64Array.from(cum, (x, j) => x - (j ? cum[j - 1] : 0)) };
  });
  const pit = candidates.map(() => new Float64Array(m));
  const rng = candidates.map(() => createPrng(seed, 3));
  const crps = new Float64Array(candidates.length);
  const covered = new Float64Array(candidates.length);
  const nearest = new Float64Array(kMax);
  const distinctK = [...new Set(ks)];
  for (let i = 0; i < m; i++) {
    const y = heldOut.error[i];
    nearestSorted(train.predictor, train.error, 0, n, heldOut.predictor[i], kMax, nearest);
    for (const k of distinctK) {
      const errors = nearest.subarray(0, k);
      const order = ascendingOrder(errors);
      for (let c = 0; c < candidates.length; c++) {
        if (ks[c] !== k) continue;
        const { cum, w } = weights[c];
        let below = 0;
        let equal = 0;
        for (let j = 0; j < k; j++) {
          if (errors[j] < y) below += w[j];
          else if (errors[j] === y) equal += w[j];
        }
        const u = (below + rng[c].nextFloat() * equal) / cum[k - 1];
        pit[c][i] = u;
        if (u >= 0.05 && u <= 0.95) covered[c]++;
        crps[c] += crpsWeighted(errors, w, y, order);
      }
    }
  }
  return candidates.map(({ kernel, kScale }, c) => ({ kernel, kScale, k: ks[c], alpha: alphaIndex(pit[c]), crps: crps[c] / m, coverage90: covered[c] / m, cases: m }));
}

/** The chosen settings by the rule above. */
export function chooseNeighbourSettings(scores: NeighbourScore[]): NeighbourSettings {
  if (!scores.length) throw new RangeError('no neighbour settings to choose from');
  const best = Math.max(...scores.map((s) => s.alpha));
  const reliable = scores.filter((s) => s.alpha >= best - ALPHA_SLACK);
  const chosen = reliable.reduce((a, b) => (b.crps < a.crps ? b : a));
  return { kernel: chosen.kernel, kScale: chosen.kScale };
}

export interface SeriesNeighbourChoice {
  settings: NeighbourSettings;
  /** Per candidate, the two folds' scores averaged. */
  scores: NeighbourScore[];
}

/**
 * Two-fold choice on a series of members' segments laid end to end (as the lead-free archive is
 * built): the first half of every segment (by time) trains, the second half is held out, then the
 * other way round; alpha, CRPS and coverage are averaged over the folds.
 */
export function chooseNeighboursByHalves(input: {
  corrected: ArrayLike<number>;
  observed: ArrayLike<number>;
  segmentLength: number;
  transform: ErrorTransform;
}): SeriesNeighbourChoice {
  const { corrected, observed, segmentLength, transform } = input;
  const S = corrected.length;
  const inFirstHalf = (i: number) => i % segmentLength < segmentLength / 2;
  const fold = (trainFirst: boolean): NeighbourScore[] => {
    const pred: number[] = [];
    const err: number[] = [];
    const hoPred: number[] = [];
    const hoErr: number[] = [];
    for (let i = 0; i < S; i++) {
      const c = corrected[i];
      const o = observed[i];
      if (!Number.isFinite(c) || !Number.isFinite(o)) continue;
      const e = forwardTransform(transform, o) - forwardTransform(transform, c);
      if (inFirstHalf(i) === trainFirst) {
        pred.push(c);
        err.push(e);
      } else {
        hoPred.push(c);
        hoErr.push(e);
      }
    }
    const order = pred.map((_, i) => i).sort((a, b) => pred[a] - pred[b] || a - b);
    const train = { predictor: Float64Array.from(order, (i) => pred[i]), error: Float64Array.from(order, (i) => err[i]) };
    return scoreNeighbourSettings(train, { predictor: hoPred, error: hoErr });
  };
  const a = fold(true);
  const b = fold(false);
  const scores = a.map((s, i) => ({
    ...s,
    alpha: (s.alpha + b[i].alpha) / 2,
    crps: (s.crps + b[i].crps) / 2,
    coverage90: (s.coverage90 + b[i].coverage90) / 2,
    k: Math.round((s.k + b[i].k) / 2),
    cases: s.cases + b[i].cases,
  }));
  return { settings: chooseNeighbourSettings(scores), scores };
}
