import { createPrng } from '../prng.ts';
import { quantileSorted } from '../scores/quantile.ts';

/**
 * Moving-block bootstrap over issue times (Künsch 1989). The forecasts of neighbouring issues
 * share valid times — and errors — for as many issues as the horizon spans, so issues are
 * resampled in blocks of at least that length: ⌈n/L⌉ blocks of L consecutive issues, each block
 * starting uniformly among the n − L + 1 possible starts, joined and cut to n issues. A statistic
 * that is a function of per-issue sums is re-evaluated on each replicate from weighted sums,
 * without copying cases. The
 * interval is the percentile interval of the replicates (Efron & Tibshirani 1993, ch. 13).
 */
export interface BootstrapOptions {
  /** Block length in issues (≥ 1; clipped to n). */
  blockLength: number;
  /** Replicates (default 500). */
  replicates?: number;
  /** Central level of the intervals (default 0.9). */
  level?: number;
  seed?: number;
}

export interface Interval {
  low: number;
  high: number;
}

/** Block length in issues covering a horizon: ⌈horizon / median issue spacing⌉, at least 1. */
export function blockLengthFor(issueMs: ArrayLike<number>, horizonMs: number): number {
  const gaps: number[] = [];
  for (let i = 1; i < issueMs.length; i++) if (issueMs[i] > issueMs[i - 1]) gaps.push(issueMs[i] - issueMs[i - 1]);
  if (!gaps.length || !(horizonMs > 0)) return 1;
  gaps.sort((a, b) => a - b);
  const spacing = gaps[gaps.length >> 1];
  return Math.max(1, Math.ceil(horizonMs / spacing - 1e-9));
}

/**
 * One replicate: the starts of its blocks (the last block may be cut short). Weighted sums come
 * from prefix sums in O(blocks) — Σ_blocks (P[s + len] − P[s]) — instead of O(issues); the
 * weight per issue is built only when a statistic needs it (ROC area).
 */
export class Replicate {
  readonly starts: Int32Array;
  readonly lengths: Int32Array;
  private w: Float64Array | null = null;
  private readonly sums = new Map<Float64Array, number>();

  constructor(
    readonly n: number,
    readonly blockLength: number,
    next: (k: number) => number,
  ) {
    const len = Math.max(1, Math.min(blockLength, n));
    const blocks = Math.ceil(n / len);
    this.starts = new Int32Array(blocks);
    this.lengths = new Int32Array(blocks);
    for (let b = 0; b < blocks; b++) {
      this.starts[b] = next(n - len + 1);
      this.lengths[b] = Math.min(len, n - b * len);
    }
  }

  /** Σ w[i]·a[i] from prefix = prefixSums(a); kept per array, as statistics share their sums. */
  sum(prefix: Float64Array): number {
    const known = this.sums.get(prefix);
    if (known !== undefined) return known;
    let s = 0;
    for (let b = 0; b < this.starts.length; b++) s += prefix[this.starts[b] + this.lengths[b]] - prefix[this.starts[b]];
    this.sums.set(prefix, s);
    return s;
  }

  /** How many times each issue was drawn. */
  weights(): Float64Array {
    if (!this.w) {
      this.w = new Float64Array(this.n);
      for (let b = 0; b < this.starts.length; b++) for (let j = 0; j < this.lengths[b]; j++) this.w[this.starts[b] + j]++;
    }
    return this.w;
  }
}

/** P[0] = 0, P[i + 1] = P[i] + a[i] (NaN entries count as 0). */
export function prefixSums(a: ArrayLike<number>): Float64Array {
  const p = new Float64Array(a.length + 1);
  for (let i = 0; i < a.length; i++) p[i + 1] = p[i] + (Number.isNaN(a[i]) ? 0 : a[i]);
  return p;
}

/**
 * Percentile intervals of several statistics over the same replicates (paired differences stay
 * paired: each statistic sees the same resampled issues). A statistic returns NaN when it is not
 * defined on a replicate (no event drawn, say); such replicates are left out of its interval, and
 * the interval is NaN when more than half of them are.
 */
export function blockBootstrap(nIssues: number, statistics: ((r: Replicate) => number)[], options: BootstrapOptions): Interval[] {
  const R = options.replicates ?? 500;
  const level = options.level ?? 0.9;
  if (!Number.isInteger(options.blockLength) || options.blockLength < 1) throw new RangeError('blockLength must be a positive integer');
  if (!Number.isInteger(R) || R < 1) throw new RangeError('replicates must be a positive integer');
  if (!(level > 0 && level < 1)) throw new RangeError('level must be in (0, 1)');
  const none = statistics.map(() => ({ low: NaN, high: NaN }));
  if (nIssues < 2) return none;
  const rng = createPrng(options.seed ?? 1, 11);
  const next = (k: number) => rng.nextInt(k);
  const draws = statistics.map(() => new Float64Array(R));
  for (let r = 0; r < R; r++) {
    const rep = new Replicate(nIssues, options.blockLength, next);
    for (let s = 0; s < statistics.length; s++) draws[s][r] = statistics[s](rep);
  }
  const lo = (1 - level) / 2;
  return draws.map((d) => {
    const ok = Float64Array.from(d.filter((x) => Number.isFinite(x))).sort();
    if (ok.length * 2 < R) return { low: NaN, high: NaN };
    return { low: quantileSorted(ok, lo), high: quantileSorted(ok, 1 - lo) };
  });
}

/**
 * The same replicates for statistics of per-issue sums, with the sums laid out for speed: the
 * columns' prefix sums are interleaved (issue-major), so a block adds one contiguous row
 * difference for all columns at once instead of two scattered reads per column. Each statistic
 * gets the replicate's column sums.
 */
export function blockBootstrapColumns(
  columns: readonly ArrayLike<number>[],
  statistics: ((sums: Float64Array) => number)[],
  options: BootstrapOptions,
): Interval[] {
  const nIssues = columns.length ? columns[0].length : 0;
  const A = columns.length;
  for (const c of columns) if (c.length !== nIssues) throw new RangeError('every column needs one value per issue');
  // P[(i·A) + a] = Σ_{j<i} column a at j, for i = 0 … n.
  const P = new Float64Array((nIssues + 1) * A);
  for (let i = 0; i < nIssues; i++) {
    const row = i * A;
    for (let a = 0; a < A; a++) {
      const v = columns[a][i];
      P[row + A + a] = P[row + a] + (Number.isNaN(v) ? 0 : v);
    }
  }
  const sums = new Float64Array(A);
  // Every full block's sums, once: D[s·A + a] = P[(s + L)·A + a] − P[s·A + a] for each start s, the
  // same differences the replicates would take, so a replicate reads one row per block.
  const L = Math.max(1, Math.min(options.blockLength, nIssues));
  const starts = nIssues >= 2 ? nIssues - L + 1 : 0;
  const D = new Float64Array(starts * A);
  for (let s = 0; s < starts; s++) {
    const lo = s * A;
    const hi = (s + L) * A;
    for (let a = 0; a < A; a++) D[lo + a] = P[hi + a] - P[lo + a];
  }
  return blockBootstrap(
    nIssues,
    statistics.map((f, s) => (rep: Replicate) => {
      // The sums are built once per replicate, by the first statistic.
      if (s === 0) {
        sums.fill(0);
        for (let b = 0; b < rep.starts.length; b++) {
          const lo = rep.starts[b] * A;
          if (rep.lengths[b] === L) {
            // Four columns a step (each column's sum still adds its blocks in the same order).
            let a = 0;
            for (; a + 3 < A; a += 4) {
              sums[a] += D[lo + a];
              sums[a + 1] += D[lo + a + 1];
              sums[a + 2] += D[lo + a + 2];
              sums[a + 3] += D[lo + a + 3];
            }
            for (; a < A; a++) sums[a] += D[lo + a];
          } else {
            const hi = (rep.starts[b] + rep.lengths[b]) * A;
            for (let a = 0; a < A; a++) sums[a] += P[hi + a] - P[lo + a];
          }
        }
      }
      return f(sums);
    }),
    options,
  );
}
