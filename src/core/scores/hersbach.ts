import { HersbachAccumulator, type HersbachDecomposition } from '../verification/hersbach-accumulator.ts';

export type { HersbachDecomposition };

/** Hersbach (2000) decomposition of a whole set of ensembles at once (the definitions are beside HersbachDecomposition). */
export function hersbachDecomposition(
  ensembles: ArrayLike<number>,
  obs: ArrayLike<number | null>,
  nMembers: number,
): HersbachDecomposition {
  const N = nMembers;
  const nCases = obs.length;
  if (N < 1 || ensembles.length !== nCases * N) throw new RangeError('ensembles must hold obs.length × nMembers values');
  // The same sums, case by case, as a streamed hindcast gathers them.
  const sums = new HersbachAccumulator(N);
  const row = new Float64Array(N);
  for (let c = 0; c < nCases; c++) {
    const y = obs[c];
    if (y === null || !Number.isFinite(y)) continue;
    for (let j = 0; j < N; j++) row[j] = ensembles[c * N + j];
    row.sort();
    sums.add(row, y);
  }
  return sums.result();
}
