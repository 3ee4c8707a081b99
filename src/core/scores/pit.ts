import { createPrng } from '../prng.ts';

/**
 * Probability integral transform of each observation against its ensemble/samples, randomised
 * among ties: with `below` members < y and `ties` members == y out of m,
 *   PIT = (below + U·(ties + 1)) / (m + 1),  U ~ uniform[0, 1) from the seeded generator.
 * This is the randomised rank of y among the m + 1 values, spread over [0, 1): it is exactly
 * uniform when y and the members are exchangeable (a calibrated ensemble), ties included
 * (zero flows tie often). One uniform is drawn per case, tie or not, so results do not shift
 * when ties appear. Missing observations give NaN. Layout: row-major nCases × nMembers.
 */
export function pitValues(
  ensembles: ArrayLike<number>,
  obs: ArrayLike<number | null>,
  nMembers: number,
  seed: number,
): Float64Array {
  const nCases = obs.length;
  if (nMembers < 1 || ensembles.length !== nCases * nMembers) throw new RangeError('ensembles must hold obs.length × nMembers values');
  const rng = createPrng(seed);
  const out = new Float64Array(nCases);
  for (let c = 0; c < nCases; c++) {
    const u = rng.nextFloat();
    const y = obs[c];
    if (y === null || !Number.isFinite(y)) {
      out[c] = NaN;
      continue;
    }
    let below = 0;
    let ties = 0;
    for (let j = 0; j < nMembers; j++) {
      const x = ensembles[c * nMembers + j];
      if (x < y) below++;
      else if (x === y) ties++;
    }
    out[c] = (below + u * (ties + 1)) / (nMembers + 1);
  }
  return out;
}
