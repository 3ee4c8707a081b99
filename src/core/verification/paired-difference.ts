/**
 * Mean of paired per-case score differences (for example CRPS of the stochastic stage minus
 * CRPS of the corrected ensemble) with a batch-means standard error: the cases, in the order
 * given (time order in a hindcast), are cut into B contiguous batches and se = sd(batch
 * means)/√B. Batches absorb the dependence between neighbouring cases (lead times of one
 * issue, consecutive days) that makes the plain standard error too small. t = mean/se; |t| > 2
 * is read as a clear difference (common practice).
 */
export interface PairedDifference {
  n: number;
  meanDifference: number | null;
  /** meanDifference relative to the mean score of the reference (second) forecast. */
  relativeDifference: number | null;
  standardError: number | null;
  t: number | null;
  batches: number;
}

export function pairedDifference(
  score: ArrayLike<number>,
  reference: ArrayLike<number>,
  nBatches = 20,
): PairedDifference {
  if (score.length !== reference.length) throw new RangeError('score and reference must have the same length');
  if (!Number.isInteger(nBatches) || nBatches < 2) throw new RangeError('nBatches must be an integer ≥ 2');
  const d: number[] = [];
  let refSum = 0;
  for (let i = 0; i < score.length; i++) {
    const a = score[i];
    const b = reference[i];
    if (!Number.isFinite(a) || !Number.isFinite(b)) continue;
    d.push(a - b);
    refSum += b;
  }
  const n = d.length;
  if (n === 0) return { n, meanDifference: null, relativeDifference: null, standardError: null, t: null, batches: 0 };
  let sum = 0;
  for (const v of d) sum += v;
  const mean = sum / n;
  const refMean = refSum / n;
  const relativeDifference = refMean !== 0 ? mean / refMean : null;
  // Fewer than 5 cases per batch gives no useful batch means.
  const B = Math.min(nBatches, Math.floor(n / 5));
  if (B < 2) return { n, meanDifference: mean, relativeDifference, standardError: null, t: null, batches: 0 };
  const means = new Float64Array(B);
  for (let b = 0; b < B; b++) {
    const lo = Math.floor((b * n) / B);
    const hi = Math.floor(((b + 1) * n) / B);
    let s = 0;
    for (let i = lo; i < hi; i++) s += d[i];
    means[b] = s / (hi - lo);
  }
  let mm = 0;
  for (const v of means) mm += v;
  mm /= B;
  let v2 = 0;
  for (const v of means) v2 += (v - mm) ** 2;
  const se = Math.sqrt(v2 / (B - 1) / B);
  return {
    n,
    meanDifference: mean,
    relativeDifference,
    standardError: se,
    t: se > 0 ? mean / se : mean === 0 ? 0 : null,
    batches: B,
  };
}
