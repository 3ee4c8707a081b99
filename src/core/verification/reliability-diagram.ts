import { createPrng } from '../prng.ts';
import { quantileSorted } from '../quantile.ts';
import { probabilityBin } from './probability-bins.ts';

/**
 * Reliability-diagram data for an exceedance event: per probability bin the count, the mean
 * forecast probability and the observed frequency, with consistency bars by resampling
 * (Bröcker & Smith 2007): draw n forecasts with replacement from the sample's own forecasts,
 * draw each outcome as Bernoulli(forecast) — what a reliable forecast would have produced — and
 * bin them as the real ones. The bar is the central `level` range of the surrogate
 * (observed frequency − mean forecast) in each bin, placed around the bin's real mean forecast:
 * a real observed frequency outside the bar is hard to reconcile with reliability.
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
  /** Surrogate samples (default 200). */
  resamples?: number;
  /** Central range of the bars (default 0.9). */
  level?: number;
  seed?: number;
}

export function reliabilityDiagram(prob: ArrayLike<number>, outcome: ArrayLike<number>, options: DiagramOptions = {}): DiagramBin[] {
  const B = options.bins ?? 10;
  const R = options.resamples ?? 200;
  const level = options.level ?? 0.9;
  if (!Number.isInteger(B) || B < 1) throw new RangeError('bins must be a positive integer');
  if (!Number.isInteger(R) || R < 0) throw new RangeError('resamples must be a non-negative integer');
  if (!(level > 0 && level < 1)) throw new RangeError('level must be in (0, 1)');
  const p: number[] = [];
  const o: number[] = [];
  for (let i = 0; i < prob.length; i++) {
    if (Number.isNaN(prob[i]) || Number.isNaN(outcome[i])) continue;
    p.push(prob[i]);
    o.push(outcome[i]);
  }
  const n = p.length;
  const binOf = Int32Array.from(p, (x) => probabilityBin(x, B));
  const count = new Float64Array(B);
  const sumP = new Float64Array(B);
  const sumO = new Float64Array(B);
  for (let i = 0; i < n; i++) {
    count[binOf[i]]++;
    sumP[binOf[i]] += p[i];
    sumO[binOf[i]] += o[i];
  }
  // Surrogate deviations (observed frequency − mean forecast) per bin and resample.
  const dev: number[][] = Array.from({ length: B }, () => []);
  if (n > 0 && R > 0) {
    const rng = createPrng(options.seed ?? 1, 7);
    const c = new Float64Array(B);
    const sp = new Float64Array(B);
    const so = new Float64Array(B);
    for (let r = 0; r < R; r++) {
      c.fill(0);
      sp.fill(0);
      so.fill(0);
      for (let i = 0; i < n; i++) {
        const j = rng.nextInt(n);
        const k = binOf[j];
        c[k]++;
        sp[k] += p[j];
        if (rng.nextFloat() < p[j]) so[k]++;
      }
      for (let k = 0; k < B; k++) if (c[k] > 0) dev[k].push((so[k] - sp[k]) / c[k]);
    }
  }
  const lo = (1 - level) / 2;
  return Array.from({ length: B }, (_, k) => {
    const mf = count[k] ? sumP[k] / count[k] : NaN;
    const d = Float64Array.from(dev[k]).sort();
    return {
      lower: k / B,
      upper: (k + 1) / B,
      count: count[k],
      meanForecast: mf,
      observedFrequency: count[k] ? sumO[k] / count[k] : NaN,
      consistencyLow: count[k] && d.length ? Math.max(0, mf + quantileSorted(d, lo)) : NaN,
      consistencyHigh: count[k] && d.length ? Math.min(1, mf + quantileSorted(d, 1 - lo)) : NaN,
    };
  });
}
