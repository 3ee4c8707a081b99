import { normalQuantile } from '../scores/normal.ts';
import { createPrng } from '../prng.ts';
import { quantileSorted } from '../scores/quantile.ts';
import { probabilityBin } from './probability-bins.ts';

/**
 * Reliability-diagram data for an exceedance event: per probability bin the count, the mean
 * forecast probability and the observed frequency, with consistency bars by resampling
 * (Bröcker & Smith 2007): draw forecasts with replacement from the bin's own forecasts, draw each
 * outcome as Bernoulli(forecast) — what a reliable forecast would have produced — and take the
 * central `level` range of the surrogate (observed frequency − mean forecast), placed around the
 * bin's real mean forecast. A real observed frequency outside the bar is hard to reconcile with
 * reliability. The bin's count is held fixed (resampling within the bin). For bins of more than
 * `exactUpTo` cases the surrogate deviation is replaced by its normal limit: mean 0, variance
 * mean(p(1 − p))/n_k (the resampled deviation is a mean of n_k independent terms of that
 * variance), which keeps the cost independent of the sample size.
 */
export interface DiagramBin {
  lower: number;
  upper: number;
  count: number;
  meanForecast: number;
  observedFrequency: number;
  consistencyLow: number;
  consistencyHigh: number;
}

export interface DiagramOptions {
  bins?: number;
  /** Surrogate samples per bin (default 200; 0 = no bars). */
  resamples?: number;
  /** Central range of the bars (default 0.9). */
  level?: number;
  seed?: number;
  /** Largest bin resampled case by case (default 200). */
  exactUpTo?: number;
}

export function reliabilityDiagram(prob: ArrayLike<number>, outcome: ArrayLike<number>, options: DiagramOptions = {}): DiagramBin[] {
  const B = options.bins ?? 10;
  const R = options.resamples ?? 200;
  const level = options.level ?? 0.9;
  const exactUpTo = options.exactUpTo ?? 200;
  if (!Number.isInteger(B) || B < 1) throw new RangeError('bins must be a positive integer');
  if (!Number.isInteger(R) || R < 0) throw new RangeError('resamples must be a non-negative integer');
  if (!(level > 0 && level < 1)) throw new RangeError('level must be in (0, 1)');
  const members: number[][] = Array.from({ length: B }, () => []);
  const sumO = new Float64Array(B);
  for (let i = 0; i < prob.length; i++) {
    const p = prob[i];
    if (Number.isNaN(p) || Number.isNaN(outcome[i])) continue;
    const k = probabilityBin(p, B);
    members[k].push(p);
    sumO[k] += outcome[i];
  }
  const lo = (1 - level) / 2;
  const z = normalQuantile(1 - lo);
  const rng = createPrng(options.seed ?? 1, 7);
  return members.map((ps, k) => {
    const n = ps.length;
    let sp = 0;
    let spq = 0;
    for (const p of ps) {
      sp += p;
      spq += p * (1 - p);
    }
    const mf = n ? sp / n : NaN;
    let dLo = NaN;
    let dHi = NaN;
    if (n > 0 && R > 0) {
      if (n > exactUpTo) {
        const sd = Math.sqrt(spq / n / n);
        dLo = -z * sd;
        dHi = z * sd;
      } else {
        const d = new Float64Array(R);
        for (let r = 0; r < R; r++) {
          let dev = 0;
          for (let j = 0; j < n; j++) {
            const p = ps[rng.nextInt(n)];
            dev += (rng.nextFloat() < p ? 1 : 0) - p;
          }
          d[r] = dev / n;
        }
        d.sort();
        dLo = quantileSorted(d, lo);
        dHi = quantileSorted(d, 1 - lo);
      }
    }
    return {
      lower: k / B,
      upper: (k + 1) / B,
      count: n,
      meanForecast: mf,
      observedFrequency: n ? sumO[k] / n : NaN,
      consistencyLow: Number.isFinite(dLo) ? Math.max(0, mf + dLo) : NaN,
      consistencyHigh: Number.isFinite(dHi) ? Math.min(1, mf + dHi) : NaN,
    };
  });
}
