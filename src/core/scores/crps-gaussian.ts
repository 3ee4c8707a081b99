import { normalCdf, normalPdf } from './normal.ts';

/**
 * CRPS of a normal forecast N(mu, sigma²) for observation y, closed form of Gneiting et al. (2005):
 * σ·[z(2Φ(z) − 1) + 2φ(z) − 1/√π], z = (y − μ)/σ. σ = 0 gives |y − μ|.
 */
export function crpsGaussian(mu: number, sigma: number, y: number): number {
  if (!(sigma >= 0)) throw new RangeError(`sigma must be ≥ 0, got ${sigma}`);
  if (sigma === 0) return Math.abs(y - mu);
  const z = (y - mu) / sigma;
  return sigma * (z * (2 * normalCdf(z) - 1) + 2 * normalPdf(z) - 0.5641895835477563);
}
