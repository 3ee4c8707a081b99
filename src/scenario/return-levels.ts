// Annual maxima and Gumbel (EV1) return levels fitted by L-moments.
// Sample L-moments from unbiased probability-weighted moments (Hosking 1990, J. R. Stat. Soc. B 52;
// Hosking & Wallis 1997, "Regional Frequency Analysis", eqs. 2.4–2.10 — numbering from memory):
//   b0 = mean, b1 = (1/n) Σ_{j=2..n} (j − 1)/(n − 1) x(j) (ascending order), l1 = b0, l2 = 2 b1 − b0.
// Gumbel by L-moments (Hosking & Wallis 1997, Appendix A.5, from memory):
//   α = l2 / ln 2, ξ = l1 − γ α (γ Euler's constant); quantile x(F) = ξ − α ln(−ln F).
// The T-year return level is the quantile at F = 1 − 1/T.
import { yearUtc } from './calendar.ts';

const EULER_GAMMA = 0.5772156649015329;

export interface GumbelFit {
  readonly location: number;
  readonly scale: number;
}

/** Maximum per calendar year (UTC) of finite values; years with fewer than `minCount` values are skipped. */
export function annualMaxima(values: ArrayLike<number>, timesMs: ArrayLike<number>, minCount = 300): number[] {
  const out: number[] = [];
  let year = Number.NaN;
  let max = -Infinity;
  let count = 0;
  const flush = () => {
    if (count >= minCount) out.push(max);
  };
  for (let i = 0; i < values.length; i++) {
    const y = yearUtc(timesMs[i]);
    if (y !== year) {
      if (i > 0) flush();
      year = y;
      max = -Infinity;
      count = 0;
    }
    const v = values[i];
    if (Number.isFinite(v)) {
      if (v > max) max = v;
      count++;
    }
  }
  if (values.length > 0) flush();
  return out;
}

/** First two sample L-moments [l1, l2]. */
export function sampleLMoments(sample: ArrayLike<number>): [number, number] {
  const n = sample.length;
  if (n < 2) throw new RangeError('L-moments need at least two values');
  const x = Float64Array.from(sample).sort();
  let b0 = 0;
  let b1 = 0;
  for (let j = 0; j < n; j++) {
    b0 += x[j];
    b1 += (j / (n - 1)) * x[j];
  }
  b0 /= n;
  b1 /= n;
  return [b0, 2 * b1 - b0];
}

export function fitGumbelLMoments(sample: ArrayLike<number>): GumbelFit {
  const [l1, l2] = sampleLMoments(sample);
  if (!(l2 > 0)) throw new RangeError('Gumbel fit needs a sample with spread (l2 > 0)');
  const scale = l2 / Math.LN2;
  return { location: l1 - EULER_GAMMA * scale, scale };
}

export function gumbelQuantile(fit: GumbelFit, probability: number): number {
  return fit.location - fit.scale * Math.log(-Math.log(probability));
}

export function gumbelReturnLevel(fit: GumbelFit, returnPeriodYears: number): number {
  if (!(returnPeriodYears > 1)) throw new RangeError('return period must exceed 1 year');
  return gumbelQuantile(fit, 1 - 1 / returnPeriodYears);
}
