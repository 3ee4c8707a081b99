/**
 * Rank histogram from PIT values (see pitValues): bin = ⌊PIT·nBins⌋. With nBins = nMembers + 1
 * this is exactly the classical rank histogram of y among the members (Talagrand diagram) with
 * ties randomised; fewer bins group ranks for large sample sets. NaN values are skipped.
 */
export function rankHistogram(pit: ArrayLike<number>, nBins: number): Float64Array {
  if (!Number.isInteger(nBins) || nBins < 1) throw new RangeError('nBins must be a positive integer');
  const counts = new Float64Array(nBins);
  for (let i = 0; i < pit.length; i++) {
    const v = pit[i];
    if (Number.isNaN(v)) continue;
    counts[Math.min(nBins - 1, Math.max(0, Math.floor(v * nBins)))]++;
  }
  return counts;
}
