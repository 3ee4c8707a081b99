import { quantileSorted } from './quantile.ts';

/**
 * Coverage and mean width of the central `level` interval of each ensemble, its ends taken as
 * definition-7 quantiles (1 − level)/2 and (1 + level)/2 of the members. An observation on an
 * end counts as covered. Cases with a missing observation are skipped; `n` counts those used.
 */
export function intervalCoverage(
  ensembles: ArrayLike<number>,
  obs: ArrayLike<number | null>,
  nMembers: number,
  level = 0.95,
): { n: number; coverage: number; meanWidth: number } {
  if (!(level > 0 && level < 1)) throw new RangeError('level must be in (0, 1)');
  const nCases = obs.length;
  if (nMembers < 1 || ensembles.length !== nCases * nMembers) throw new RangeError('ensembles must hold obs.length × nMembers values');
  const row = new Float64Array(nMembers);
  const pl = (1 - level) / 2;
  const pu = (1 + level) / 2;
  let n = 0;
  let inside = 0;
  let width = 0;
  for (let c = 0; c < nCases; c++) {
    const y = obs[c];
    if (y === null || !Number.isFinite(y)) continue;
    for (let j = 0; j < nMembers; j++) row[j] = ensembles[c * nMembers + j];
    row.sort();
    const lo = quantileSorted(row, pl);
    const hi = quantileSorted(row, pu);
    n++;
    if (y >= lo && y <= hi) inside++;
    width += hi - lo;
  }
  return { n, coverage: n ? inside / n : NaN, meanWidth: n ? width / n : NaN };
}
