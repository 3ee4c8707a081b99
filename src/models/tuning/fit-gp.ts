// Fits the GP hyperparameters by maximising the log marginal likelihood of the standardised
// outputs: multi-start Nelder–Mead over the log hyperparameters, each kept inside its box by a
// logistic map (gradient-free and robust; the surface is cheap for the few dozen trials a
// tuning run has).
import type { Prng } from '../../core/prng.ts';
import { cholesky } from './cholesky.ts';
import { DEFAULT_JITTER, conditionGp, standardise } from './gp.ts';
import type { GpHyper, GpModel } from './gp.ts';
import { matern52 } from './matern52.ts';
import { nelderMead } from './nelder-mead.ts';

export interface GpBounds {
  lengthScale: [number, number];
  signalVariance: [number, number];
  noiseVariance: [number, number];
}

// Common practice for inputs scaled to [0, 1] and standardised outputs: length scales from a
// fiftieth of the range to ten ranges (a nearly flat direction), a signal variance around 1,
// noise from almost none to as large as the signal.
export const DEFAULT_BOUNDS: GpBounds = {
  lengthScale: [0.02, 10],
  signalVariance: [0.05, 20],
  noiseVariance: [1e-6, 1],
};

export interface FitGpOptions {
  prng: Prng;
  bounds?: GpBounds;
  /** Nelder–Mead starts: a default point, the warm start if given, then random points. */
  starts?: number;
  /** Previous fit, e.g. from the last tuning step. */
  warmStart?: GpHyper;
  jitter?: number;
  maxEvaluations?: number;
}

/** Log marginal likelihood for many hyperparameter values on fixed data, reusing buffers. */
function likelihoodSurface(x: Float64Array, d: number, z: Float64Array, jitter: number) {
  const n = z.length;
  // Squared coordinate differences per dimension for the lower triangle, computed once.
  const pairs = (n * (n - 1)) / 2;
  const sq = new Float64Array(pairs * d);
  let p = 0;
  for (let i = 0; i < n; i++) {
    for (let j = 0; j < i; j++, p++) {
      for (let k = 0; k < d; k++) sq[p * d + k] = (x[i * d + k] - x[j * d + k]) ** 2;
    }
  }
  const cov = new Float64Array(n * n);
  const chol = new Float64Array(n * n);
  const w = new Float64Array(n);
  const invL2 = new Float64Array(d);
  return (hyper: GpHyper): number => {
    for (let k = 0; k < d; k++) invL2[k] = 1 / hyper.lengthScales[k] ** 2;
    let q = 0;
    for (let i = 0; i < n; i++) {
      cov[i * n + i] = hyper.signalVariance + hyper.noiseVariance + jitter;
      for (let j = 0; j < i; j++, q++) {
        let r2 = 0;
        for (let k = 0; k < d; k++) r2 += sq[q * d + k] * invL2[k];
        cov[i * n + j] = hyper.signalVariance * matern52(Math.sqrt(r2));
      }
    }
    if (!cholesky(cov, n, chol)) return -Infinity;
    let lml = -0.5 * n * Math.log(2 * Math.PI);
    for (let i = 0; i < n; i++) {
      let s = z[i];
      for (let k = 0; k < i; k++) s -= chol[i * n + k] * w[k];
      w[i] = s / chol[i * n + i];
      lml -= 0.5 * w[i] * w[i] + Math.log(chol[i * n + i]);
    }
    return lml;
  };
}

const logistic = (t: number): number => 1 / (1 + Math.exp(-t));
const logit = (u: number): number => Math.log(u / (1 - u));

export function fitGp(x: Float64Array, d: number, y: ArrayLike<number>, options: FitGpOptions): GpModel {
  const bounds = options.bounds ?? DEFAULT_BOUNDS;
  const jitter = options.jitter ?? DEFAULT_JITTER;
  const { z } = standardise(y);
  const surface = likelihoodSurface(x, d, z, jitter);
  // Coordinates: d log length scales, log signal variance, log noise variance.
  const lo = new Float64Array(d + 2);
  const hi = new Float64Array(d + 2);
  for (let k = 0; k < d; k++) [lo[k], hi[k]] = bounds.lengthScale.map(Math.log);
  [lo[d], hi[d]] = bounds.signalVariance.map(Math.log);
  [lo[d + 1], hi[d + 1]] = bounds.noiseVariance.map(Math.log);
  const toHyper = (t: ArrayLike<number>): GpHyper => {
    const v = (i: number): number => Math.exp(lo[i] + (hi[i] - lo[i]) * logistic(t[i]));
    return { lengthScales: Array.from({ length: d }, (_, k) => v(k)), signalVariance: v(d), noiseVariance: v(d + 1) };
  };
  const fromHyper = (h: GpHyper): Float64Array => {
    const logs = [...h.lengthScales, h.signalVariance, h.noiseVariance].map(Math.log);
    // Keep starts off the box edges, where the logistic map is flat.
    return Float64Array.from(logs, (l, i) => logit(Math.min(0.99, Math.max(0.01, (l - lo[i]) / (hi[i] - lo[i])))));
  };
  const starts: Float64Array[] = [
    fromHyper({ lengthScales: new Array(d).fill(0.3), signalVariance: 1, noiseVariance: 1e-3 }),
  ];
  if (options.warmStart) starts.push(fromHyper(options.warmStart));
  const nStarts = Math.max(starts.length, options.starts ?? 4);
  while (starts.length < nStarts) {
    starts.push(Float64Array.from({ length: d + 2 }, () => logit(0.05 + 0.9 * options.prng.nextFloat())));
  }
  let best: { t: Float64Array; value: number } | undefined;
  for (const s of starts) {
    const r = nelderMead((t) => -surface(toHyper(t)), s, {
      step: 1,
      maxEvaluations: options.maxEvaluations ?? 150 * (d + 2),
      valueTolerance: 1e-7,
      pointTolerance: 1e-4,
    });
    if (best === undefined || r.value < best.value) best = { t: r.x, value: r.value };
  }
  return conditionGp(x, d, y, toHyper(best!.t), jitter);
}
