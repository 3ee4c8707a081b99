// Expected improvement for minimisation (Jones, Schonlau & Welch 1998, eq. 15):
// EI = (best − μ − ξ) Φ(u) + σ φ(u), u = (best − μ − ξ)/σ; equals max(best − μ − ξ, 0) at σ = 0.
import { normalCdf, normalPdf } from '../../core/scores/normal.ts';

export function expectedImprovement(mean: number, sd: number, best: number, xi = 0): number {
  const gain = best - mean - xi;
  if (!(sd > 0)) return Math.max(gain, 0);
  const u = gain / sd;
  return gain * normalCdf(u) + sd * normalPdf(u);
}
