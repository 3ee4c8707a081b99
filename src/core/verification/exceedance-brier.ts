import { probabilityBin } from './probability-bins.ts';

/**
 * Brier score of an exceedance event with the Murphy (1973) decomposition over binned forecast
 * probabilities, the two within-bin terms of Stephenson et al. (2008) that make the identity
 * exact for any binning,
 *   BS = reliability − resolution + uncertainty + withinBinVariance − withinBinCovariance,
 * and the skill against a fixed climatological probability (the base rate of the fitting
 * period, not of the verified sample): BSS = 1 − BS/BS_clim with BS_clim = mean (c − o)².
 */
export interface ExceedanceBrier {
  n: number;
  events: number;
  brier: number;
  reliability: number;
  resolution: number;
  uncertainty: number;
  withinBinVariance: number;
  withinBinCovariance: number;
  /** Observed event frequency of the verified sample. */
  baseRate: number;
  /** The fixed reference probability (NaN when none was given). */
  climatologicalRate: number;
  /** Brier score of always forecasting climatologicalRate on these cases. */
  referenceBrier: number;
  /** 1 − brier/referenceBrier. */
  skill: number;
}

/** prob[i] in [0, 1] (NaN = no case), outcome[i] 1 = event, 0 = none (NaN = no case). */
export function exceedanceBrier(
  prob: ArrayLike<number>,
  outcome: ArrayLike<number>,
  climatologicalRate: number,
  nBins = 10,
): ExceedanceBrier {
  if (prob.length !== outcome.length) throw new RangeError('prob and outcome must have the same length');
  if (!Number.isInteger(nBins) || nBins < 1) throw new RangeError('nBins must be a positive integer');
  const count = new Float64Array(nBins);
  const sumP = new Float64Array(nBins);
  const sumO = new Float64Array(nBins);
  const sumPP = new Float64Array(nBins);
  const sumPO = new Float64Array(nBins);
  let n = 0;
  let bs = 0;
  let ref = 0;
  let events = 0;
  const c = climatologicalRate;
  for (let i = 0; i < prob.length; i++) {
    const p = prob[i];
    const o = outcome[i];
    if (Number.isNaN(p) || Number.isNaN(o)) continue;
    if (p < 0 || p > 1) throw new RangeError(`probability out of [0, 1]: ${p}`);
    const k = probabilityBin(p, nBins);
    count[k]++;
    sumP[k] += p;
    sumO[k] += o;
    sumPP[k] += p * p;
    sumPO[k] += p * o;
    bs += (p - o) * (p - o);
    ref += (c - o) * (c - o);
    events += o;
    n++;
  }
  const base = n ? events / n : NaN;
  let rel = 0;
  let res = 0;
  let wbv = 0;
  let wbc = 0;
  for (let k = 0; k < nBins; k++) {
    const nk = count[k];
    if (nk === 0) continue;
    const pk = sumP[k] / nk;
    const ok = sumO[k] / nk;
    rel += nk * (pk - ok) ** 2;
    res += nk * (ok - base) ** 2;
    // Σ (p − p̄)² and Σ (o − ō)(p − p̄) within the bin, from the sums.
    wbv += sumPP[k] - nk * pk * pk;
    wbc += sumPO[k] - nk * pk * ok;
  }
  return {
    n,
    events,
    brier: n ? bs / n : NaN,
    reliability: n ? rel / n : NaN,
    resolution: n ? res / n : NaN,
    uncertainty: base * (1 - base),
    withinBinVariance: n ? wbv / n : NaN,
    withinBinCovariance: n ? (2 * wbc) / n : NaN,
    baseRate: base,
    climatologicalRate: Number.isFinite(c) ? c : NaN,
    referenceBrier: n && Number.isFinite(c) ? ref / n : NaN,
    skill: n && Number.isFinite(c) && ref > 0 ? 1 - bs / ref : NaN,
  };
}
