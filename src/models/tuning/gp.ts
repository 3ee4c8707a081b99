// Gaussian-process regression with a Matérn 5/2 ARD kernel (Rasmussen & Williams 2006,
// Algorithm 2.1): inputs are expected in [0, 1]^d, outputs are standardised (mean 0, population
// standard deviation 1) before conditioning; predictions come back in the original units.
import { cholesky, solveLower, solveUpper } from './cholesky.ts';
import { matern52, scaledDistance } from './matern52.ts';

export interface GpHyper {
  /** One length scale per input dimension (in the [0, 1] input units). */
  lengthScales: number[];
  /** Signal variance σf² of the standardised outputs. */
  signalVariance: number;
  /** Noise variance σn² of the standardised outputs (added to the diagonal). */
  noiseVariance: number;
}

export interface GpModel {
  n: number;
  d: number;
  /** Training inputs, row-major n×d. */
  x: Float64Array;
  yMean: number;
  yStd: number;
  hyper: GpHyper;
  /** Extra diagonal actually used on top of the noise variance (grows if the factor fails). */
  jitter: number;
  /** Lower Cholesky factor of K + (σn² + jitter) I, row-major n×n. */
  chol: Float64Array;
  /** (K + (σn² + jitter) I)⁻¹ z, z the standardised outputs. */
  alpha: Float64Array;
  /** log p(z | X, θ) of the standardised outputs. */
  logMarginalLikelihood: number;
}

const LOG_2PI = Math.log(2 * Math.PI);
export const DEFAULT_JITTER = 1e-9;

/** Mean and population standard deviation (1 when the outputs are constant). */
export function standardise(y: ArrayLike<number>): { mean: number; std: number; z: Float64Array } {
  const n = y.length;
  let mean = 0;
  for (let i = 0; i < n; i++) mean += y[i] / n;
  let v = 0;
  for (let i = 0; i < n; i++) v += (y[i] - mean) ** 2 / n;
  const std = v > 0 ? Math.sqrt(v) : 1;
  const z = new Float64Array(n);
  for (let i = 0; i < n; i++) z[i] = (y[i] - mean) / std;
  return { mean, std, z };
}

/** Covariance of the training inputs plus diagonal, written into `out` (n×n). */
export function trainingCovariance(
  x: Float64Array, n: number, d: number, hyper: GpHyper, diagonal: number, out: Float64Array,
): void {
  for (let i = 0; i < n; i++) {
    out[i * n + i] = hyper.signalVariance + diagonal;
    for (let j = 0; j < i; j++) {
      const k = hyper.signalVariance * matern52(scaledDistance(x, i, x, j, d, hyper.lengthScales));
      out[i * n + j] = k;
      out[j * n + i] = k;
    }
  }
}

/**
 * Conditions the GP on (x, y) for fixed hyperparameters. If the factorisation fails the
 * jitter is raised tenfold (up to 1e-3) before giving up with an error.
 */
export function conditionGp(
  x: Float64Array, d: number, y: ArrayLike<number>, hyper: GpHyper, jitter = DEFAULT_JITTER,
): GpModel {
  const n = y.length;
  if (x.length !== n * d) throw new RangeError(`x holds ${x.length} values, ${n}×${d} expected`);
  const { mean, std, z } = standardise(y);
  const k = new Float64Array(n * n);
  const chol = new Float64Array(n * n);
  let j = jitter;
  for (;;) {
    trainingCovariance(x, n, d, hyper, hyper.noiseVariance + j, k);
    if (cholesky(k, n, chol)) break;
    j = j > 0 ? j * 10 : 1e-12;
    if (j > 1e-3) throw new Error('covariance matrix is not positive definite');
  }
  const alpha = Float64Array.from(z);
  solveLower(chol, n, alpha);
  let lml = 0;
  for (let i = 0; i < n; i++) lml -= 0.5 * alpha[i] * alpha[i] + Math.log(chol[i * n + i]);
  lml -= 0.5 * n * LOG_2PI;
  solveUpper(chol, n, alpha);
  return { n, d, x: Float64Array.from(x), yMean: mean, yStd: std, hyper, jitter: j, chol, alpha, logMarginalLikelihood: lml };
}

/**
 * Posterior mean and variance of the latent function (noise not included) at m points
 * (row-major m×d), in the original output units.
 */
export function predictGp(
  model: GpModel, xs: Float64Array, m: number, mean: Float64Array, variance: Float64Array,
): void {
  const { n, d, hyper } = model;
  const kStar = new Float64Array(n);
  for (let p = 0; p < m; p++) {
    let mu = 0;
    for (let i = 0; i < n; i++) {
      kStar[i] = hyper.signalVariance * matern52(scaledDistance(xs, p, model.x, i, d, hyper.lengthScales));
      mu += kStar[i] * model.alpha[i];
    }
    solveLower(model.chol, n, kStar);
    let v = hyper.signalVariance;
    for (let i = 0; i < n; i++) v -= kStar[i] * kStar[i];
    mean[p] = model.yMean + model.yStd * mu;
    variance[p] = Math.max(0, v) * model.yStd * model.yStd;
  }
}
