/**
 * Bin of a probability among `nBins` equal bins of [0, 1], closed on the right: the first bin is
 * [0, 1/B], then (k/B, (k + 1)/B]. This is the rule of sklearn's calibration_curve (numpy
 * searchsorted on the inner edges), so the diagram can be checked against it; it also keeps a
 * probability of exactly 0 ("no member above") with the lowest small probabilities.
 */
export function probabilityBin(p: number, nBins: number): number {
  let k = Math.ceil(p * nBins) - 1;
  if (k < 0) k = 0;
  if (k > nBins - 1) k = nBins - 1;
  // p·B can round across an edge (0.7 · 10 = 7.000000000000001): compare with the edges themselves.
  while (k > 0 && p <= k / nBins) k--;
  while (k < nBins - 1 && p > (k + 1) / nBins) k++;
  return k;
}
