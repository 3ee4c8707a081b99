/**
 * Brier score with the Murphy (1973) decomposition BS ≈ reliability − resolution + uncertainty,
 * and reliability-diagram bins.
 *
 * Binning: nBins equal-width bins on [0, 1], bin = min(⌊p·nBins⌋, nBins − 1); a bin's forecast is
 * the mean forecast probability of its cases. The decomposition is exact when each bin holds one
 * distinct forecast value — true for an m-member ensemble with nBins = m + 1 (the default of
 * brierScores), since its probabilities are k/m. Otherwise the within-bin terms (Stephenson et al.
 * 2008) are left out and reliability − resolution + uncertainty differs slightly from `brier`.
 */
export interface BrierResult {
  /** Cases used. */
  n: number;
  /** Mean (p − o)², computed directly. */
  brier: number;
  reliability: number;
  resolution: number;
  uncertainty: number;
  /** Observed event frequency over all cases. */
  baseRate: number;
  /** Reliability-diagram bins (length nBins); empty bins have count 0 and NaN means. */
  bins: {
    lower: Float64Array;
    upper: Float64Array;
    count: Float64Array;
    meanForecast: Float64Array;
    observedFrequency: Float64Array;
  };
}

/** From forecast probabilities and outcomes (1/true = event happened); NaN probabilities skipped. */
export function brierDecomposition(
  prob: ArrayLike<number>,
  outcome: ArrayLike<number | boolean>,
  nBins = 10,
): BrierResult {
  if (prob.length !== outcome.length) throw new RangeError('prob and outcome must have the same length');
  if (!Number.isInteger(nBins) || nBins < 1) throw new RangeError('nBins must be a positive integer');
  const count = new Float64Array(nBins);
  const sumP = new Float64Array(nBins);
  const sumO = new Float64Array(nBins);
  let n = 0;
  let bs = 0;
  let events = 0;
  for (let i = 0; i < prob.length; i++) {
    const p = prob[i];
    if (Number.isNaN(p)) continue;
    if (p < 0 || p > 1) throw new RangeError(`probability out of [0, 1]: ${p}`);
    const o = outcome[i] ? 1 : 0;
    const k = Math.min(nBins - 1, Math.floor(p * nBins));
    count[k]++;
    sumP[k] += p;
    sumO[k] += o;
    bs += (p - o) * (p - o);
    events += o;
    n++;
  }
  const base = events / n;
  let rel = 0;
  let res = 0;
  const lower = new Float64Array(nBins);
  const upper = new Float64Array(nBins);
  const meanForecast = new Float64Array(nBins);
  const observedFrequency = new Float64Array(nBins);
  for (let k = 0; k < nBins; k++) {
    lower[k] = k / nBins;
    upper[k] = (k + 1) / nBins;
    if (count[k] === 0) {
      meanForecast[k] = NaN;
      observedFrequency[k] = NaN;
      continue;
    }
    const pk = sumP[k] / count[k];
    const ok = sumO[k] / count[k];
    meanForecast[k] = pk;
    observedFrequency[k] = ok;
    rel += count[k] * (pk - ok) ** 2;
    res += count[k] * (ok - base) ** 2;
  }
  return {
    n,
    brier: n ? bs / n : NaN,
    reliability: n ? rel / n : NaN,
    resolution: n ? res / n : NaN,
    uncertainty: base * (1 - base),
    baseRate: base,
    bins: { lower, upper, count, meanForecast, observedFrequency },
  };
}

/**
 * Brier score per threshold for the exceedance event "value > threshold": forecast probability =
 * fraction of members above the threshold, outcome = observation above it. Missing observations
 * are skipped. Layout: row-major nCases × nMembers. Default nBins = nMembers + 1 (exact decomposition).
 */
export function brierScores(
  ensembles: ArrayLike<number>,
  obs: ArrayLike<number | null>,
  nMembers: number,
  thresholds: ArrayLike<number>,
  nBins = nMembers + 1,
): BrierResult[] {
  const nCases = obs.length;
  if (nMembers < 1 || ensembles.length !== nCases * nMembers) throw new RangeError('ensembles must hold obs.length × nMembers values');
  const prob = new Float64Array(nCases);
  const outcome = new Uint8Array(nCases);
  const results: BrierResult[] = [];
  for (let t = 0; t < thresholds.length; t++) {
    const thr = thresholds[t];
    for (let c = 0; c < nCases; c++) {
      const y = obs[c];
      if (y === null || !Number.isFinite(y)) {
        prob[c] = NaN;
        continue;
      }
      let above = 0;
      for (let j = 0; j < nMembers; j++) if (ensembles[c * nMembers + j] > thr) above++;
      prob[c] = above / nMembers;
      outcome[c] = y > thr ? 1 : 0;
    }
    results.push(brierDecomposition(prob, outcome, nBins));
  }
  return results;
}
