import { crpsSorted } from '../scores/crps.ts';
import { GrowableF64 } from './growable.ts';

/**
 * Decomposition of the mean ensemble CRPS (Hersbach 2000): CRPS = reliability + potential,
 * potential = uncertainty − resolution.
 *
 * Per case, members sorted x_1 ≤ … ≤ x_N; bin i (0 … N) has forecast probability p_i = i/N.
 * Interior bin i between x_i and x_{i+1} (width w): α_i = clip(y − x_i, 0, w), β_i = w − α_i
 * (clipping keeps both neighbouring bins when y equals a member). Outlier bins:
 * β_0 = x_1 − y when y < x_1, α_N = y − x_N when y > x_N.
 * Averages over cases: interior ḡ_i = ᾱ_i + β̄_i, ō_i = β̄_i/ḡ_i; outliers ō_0 = mean 1{y ≤ x_1},
 * ḡ_0 = β̄_0/ō_0; ō_N = mean 1{y ≤ x_N}, ḡ_N = ᾱ_N/(1 − ō_N) (0 when the divisor is 0).
 * reliability = Σ ḡ_i(ō_i − p_i)², potential = Σ ḡ_i ō_i(1 − ō_i).
 * uncertainty = CRPS of the observations' own sample climatology = Σ_{i<j}|y_i − y_j|/n².
 */
export interface HersbachDecomposition {
  /** Cases used (observation present). */
  n: number;
  /** Mean standard CRPS computed directly from the members (equals reliability + potential). */
  crps: number;
  reliability: number;
  potential: number;
  uncertainty: number;
  /** uncertainty − potential. */
  resolution: number;
  /** Per bin i = 0 … N: p_i, ḡ_i (mean width) and ō_i (observed frequency). */
  p: Float64Array;
  g: Float64Array;
  o: Float64Array;
}

/**
 * Hersbach (2000) CRPS decomposition gathered case by case, so a hindcast never has to hold
 * every ensemble in memory. Same bins, clipping and outlier rules as hersbachDecomposition
 * (src/core/scores/hersbach.ts); only the per-bin sums are kept, plus one observation per case for the
 * uncertainty term. All cases must have the same member count N (the bins are p_i = i/N).
 */
export class HersbachAccumulator {
  readonly nMembers: number;
  private readonly a: Float64Array;
  private readonly b: Float64Array;
  private belowFirst = 0;
  private belowLast = 0;
  private crpsSum = 0;
  private readonly ys = new GrowableF64();

  constructor(nMembers: number) {
    if (!Number.isInteger(nMembers) || nMembers < 1) throw new RangeError('nMembers must be a positive integer');
    this.nMembers = nMembers;
    this.a = new Float64Array(nMembers + 1);
    this.b = new Float64Array(nMembers + 1);
  }

  /** Adds one case: members x[0 … N−1] ascending, finite observation y; crps = crpsSorted(sorted, y) when the caller has it. */
  add(sorted: ArrayLike<number>, y: number, crps = crpsSorted(sorted, y, false, 0, this.nMembers)): void {
    const N = this.nMembers;
    const a = this.a;
    const b = this.b;
    this.ys.push(y);
    this.crpsSum += crps;
    const first = sorted[0];
    const last = sorted[N - 1];
    if (y < first) b[0] += first - y;
    if (y > last) a[N] += y - last;
    if (y <= first) this.belowFirst++;
    if (y <= last) this.belowLast++;
    let lo = first;
    for (let i = 1; i < N; i++) {
      const hi = sorted[i];
      const w = hi - lo;
      const d = y - lo;
      const al = d <= 0 ? 0 : d >= w ? w : d;
      a[i] += al;
      b[i] += w - al;
      lo = hi;
    }
  }

  get n(): number {
    return this.ys.length;
  }

  result(): HersbachDecomposition {
    const N = this.nMembers;
    const n = this.ys.length;
    const p = new Float64Array(N + 1);
    const g = new Float64Array(N + 1);
    const o = new Float64Array(N + 1);
    let reliability = 0;
    let potential = 0;
    for (let i = 0; i <= N; i++) {
      p[i] = i / N;
      const am = this.a[i] / n;
      const bm = this.b[i] / n;
      if (i === 0) {
        o[i] = this.belowFirst / n;
        g[i] = o[i] > 0 ? bm / o[i] : 0;
      } else if (i === N) {
        o[i] = this.belowLast / n;
        g[i] = 1 - o[i] > 0 ? am / (1 - o[i]) : 0;
      } else {
        g[i] = am + bm;
        o[i] = g[i] > 0 ? bm / g[i] : 0;
      }
      reliability += g[i] * (o[i] - p[i]) ** 2;
      potential += g[i] * o[i] * (1 - o[i]);
    }
    // Uncertainty: CRPS of the observations' own sample climatology, Σ_{i<j}|y_i − y_j|/n².
    const ys = Float64Array.from(this.ys.view()).sort();
    let s = 0;
    for (let j = 0; j < n; j++) s += (2 * (j + 1) - n - 1) * ys[j];
    const uncertainty = s / (n * n);
    return {
      n,
      crps: this.crpsSum / n,
      reliability,
      potential,
      uncertainty,
      resolution: uncertainty - potential,
      p,
      g,
      o,
    };
  }
}
