// One Bayesian-optimisation step: fit the GP surrogate to the trials so far, then pick the
// unit-cube point with the largest expected improvement — scored over random candidates
// (half uniform, half scattered around the best trials), the best few refined by Nelder–Mead.
import type { Prng } from '../../core/prng.ts';
import { expectedImprovement } from './expected-improvement.ts';
import { fitGp } from './fit-gp.ts';
import type { GpHyper, GpModel } from './gp.ts';
import { predictGp } from './gp.ts';
import { nelderMead } from './nelder-mead.ts';

export interface ProposeOptions {
  /** Random candidates scored by EI (default max(1000, 200·d)). */
  candidates?: number;
  /** Candidates refined by Nelder–Mead (default 3). */
  refine?: number;
  /** Exploration margin ξ in standardised output units (default 0, as in Jones et al. 1998). */
  xi?: number;
  warmStart?: GpHyper;
  /** Points (unit cube) to avoid proposing again, e.g. after rounding integer parameters. */
  isTaken?: (u: Float64Array) => boolean;
}

export interface Proposal {
  point: Float64Array;
  expectedImprovement: number;
  model: GpModel;
}

/** `points` row-major n×d in [0, 1]^d, `values` finite objective values (minimised). */
export function proposeNext(
  points: Float64Array, d: number, values: ArrayLike<number>, prng: Prng, options: ProposeOptions = {},
): Proposal {
  const n = values.length;
  const model = fitGp(points, d, values, { prng, warmStart: options.warmStart });
  const xi = options.xi ?? 0;
  let bestZ = Infinity;
  for (let i = 0; i < n; i++) bestZ = Math.min(bestZ, (values[i] - model.yMean) / model.yStd);
  const mean = new Float64Array(1);
  const variance = new Float64Array(1);
  const clamped = new Float64Array(d);
  // EI in standardised units at one point (coordinates clamped into the cube).
  const ei = (u: ArrayLike<number>): number => {
    for (let k = 0; k < d; k++) clamped[k] = Math.min(1, Math.max(0, u[k]));
    predictGp(model, clamped, 1, mean, variance);
    const mu = (mean[0] - model.yMean) / model.yStd;
    const sd = Math.sqrt(variance[0]) / model.yStd;
    return expectedImprovement(mu, sd, bestZ, xi);
  };

  const m = options.candidates ?? Math.max(1000, 200 * d);
  const order = Array.from({ length: n }, (_, i) => i).sort((a, b) => values[a] - values[b]);
  const cand = new Float64Array(m * d);
  for (let c = 0; c < m; c++) {
    const local = c % 2 === 1;
    const centre = order[Math.floor(c / 2) % Math.min(3, n)];
    const spread = c % 4 === 1 ? 0.05 : 0.15;
    for (let k = 0; k < d; k++) {
      cand[c * d + k] = local
        ? Math.min(1, Math.max(0, points[centre * d + k] + spread * prng.normal()))
        : prng.nextFloat();
    }
  }
  const candMean = new Float64Array(m);
  const candVar = new Float64Array(m);
  predictGp(model, cand, m, candMean, candVar);
  const scores = new Float64Array(m);
  for (let c = 0; c < m; c++) {
    const mu = (candMean[c] - model.yMean) / model.yStd;
    scores[c] = expectedImprovement(mu, Math.sqrt(candVar[c]) / model.yStd, bestZ, xi);
  }
  const ranked = Array.from({ length: m }, (_, c) => c).sort((a, b) => scores[b] - scores[a]);

  const refined: { u: Float64Array; ei: number }[] = [];
  for (const c of ranked.slice(0, options.refine ?? 3)) {
    const r = nelderMead((u) => -ei(u), cand.subarray(c * d, (c + 1) * d), {
      step: 0.05, maxEvaluations: 60 * d, valueTolerance: 1e-12, pointTolerance: 1e-5,
    });
    const u = r.x.map((v) => Math.min(1, Math.max(0, v)));
    refined.push({ u, ei: -r.value });
  }
  for (const c of ranked) refined.push({ u: cand.slice(c * d, (c + 1) * d), ei: scores[c] });
  refined.sort((a, b) => b.ei - a.ei); // stable: refined points win ties
  for (const r of refined) {
    if (!options.isTaken?.(r.u)) return { point: r.u, expectedImprovement: r.ei, model };
  }
  // Every candidate is taken (tiny integer space): fall back to a uniform point.
  return { point: Float64Array.from({ length: d }, () => prng.nextFloat()), expectedImprovement: 0, model };
}
