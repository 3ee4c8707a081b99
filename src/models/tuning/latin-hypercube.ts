// Latin hypercube sample in [0, 1]^d (McKay, Beckman & Conover 1979): each dimension is cut
// into n equal strata, each stratum holds exactly one point, at a random place inside it.
import type { Prng } from '../../core/prng.ts';

/** n points, row-major n×d. */
export function latinHypercube(n: number, d: number, prng: Prng): Float64Array {
  const out = new Float64Array(n * d);
  const perm = new Int32Array(n);
  for (let k = 0; k < d; k++) {
    for (let i = 0; i < n; i++) perm[i] = i;
    for (let i = n - 1; i > 0; i--) {
      const j = prng.nextInt(i + 1); // Fisher–Yates
      const t = perm[i];
      perm[i] = perm[j];
      perm[j] = t;
    }
    for (let i = 0; i < n; i++) out[i * d + k] = (perm[i] + prng.nextFloat()) / n;
  }
  return out;
}
