import { describe, expect, it } from 'vitest';
import { nearestWindow, nearestWithRandomTies } from '../../src/core/stochastic/knn.ts';
import { buildArchiveFromSeries } from '../../src/core/stochastic/error-archive.ts';
import { runStochasticStage } from '../../src/core/stochastic/stochastic-stage.ts';
import { createPrng } from '../../src/core/prng.ts';

// The uniform kernel's fast path (nearestWindow: the k nearest as a window of the sorted
// candidates, found by binary search) against the nearest-first walk every kernel used before
// (nearestWithRandomTies), and a brute-force sort of all distances.

/** Candidates in cP[1 … n] with the sentinels the stage puts around them. */
function withSentinels(sorted: number[]): Float64Array {
  return Float64Array.from([-Infinity, ...sorted, Infinity]);
}

/** Distance as the walk computes it: x − p left of the insertion point, p − x from it on. */
const distance = (p: number, x: number) => (p < x ? x - p : p - x);

/** Brute force: the k-th smallest distance, the next one (Infinity when none), and each case's distance. */
function bruteForce(sorted: number[], x: number, k: number) {
  const d = sorted.map((p) => distance(p, x));
  const ordered = [...d].sort((a, b) => a - b);
  return { d, kth: ordered[k - 1], next: k < ordered.length ? ordered[k] : Infinity };
}

function randomArchive(g: ReturnType<typeof createPrng>): number[] {
  const n = 1 + g.nextInt(80);
  const style = g.nextInt(4);
  const values = Array.from({ length: n }, () => {
    if (style === 0) return g.nextInt(6); // many ties
    if (style === 1) return g.nextInt(40) / 2; // halves: queries at midpoints tie left and right
    if (style === 2) return 7; // all equal
    return 100 * g.nextFloat(); // distinct
  });
  return values.sort((a, b) => a - b);
}

function randomQuery(g: ReturnType<typeof createPrng>, sorted: number[]): number {
  const lo = sorted[0];
  const hi = sorted[sorted.length - 1];
  switch (g.nextInt(6)) {
    case 0:
      return sorted[g.nextInt(sorted.length)]; // a case's own value
    case 1:
      return lo - 1 - g.nextInt(3); // below every case
    case 2:
      return hi + 1 + g.nextInt(3); // above every case
    case 3:
      return g.nextInt(2) ? -1e6 : 1e6;
    case 4:
      return Math.round((lo - 2 + (hi - lo + 4) * g.nextFloat()) * 4) / 4; // quarter steps
    default:
      return lo - 2 + (hi - lo + 4) * g.nextFloat();
  }
}

describe('uniform-kernel window (nearestWindow) against the nearest-first walk', () => {
  it('finds exactly the walk’s neighbour set whenever there is one set, and reports every tie at the k-th distance', () => {
    const g = createPrng(2024, 1);
    const rng = createPrng(7, 2);
    let windows = 0;
    let ties = 0;
    let edges = 0;
    for (let trial = 0; trial < 20_000; trial++) {
      const sorted = randomArchive(g);
      const n = sorted.length;
      const cP = withSentinels(sorted);
      const cE = Float64Array.from({ length: n + 2 }, (_, i) => i); // a case's "error" is its position
      const x = randomQuery(g, sorted);
      const k = g.nextInt(3) === 0 ? (g.nextInt(2) ? 1 : n) : 1 + g.nextInt(n);
      const { d, kth, next } = bruteForce(sorted, x, k);
      const a = nearestWindow(x, cP, n, k);
      expect(a === 0).toBe(next === kth);
      const walked = new Float64Array(k);
      nearestWithRandomTies(x, cP, cE, n, k, walked, 0, new Int32Array(n + 2), rng);
      const walkedSet = Array.from(walked).sort((p, q) => p - q);
      if (a > 0) {
        windows++;
        if (a === 1 || a + k - 1 === n) edges++;
        const window = Array.from({ length: k }, (_, j) => a + j);
        expect(walkedSet).toEqual(window);
        // …and it is the brute-force set: every case at distance ≤ the k-th.
        expect(window).toEqual(d.flatMap((di, i) => (di <= kth ? [i + 1] : [])));
      } else {
        ties++;
        // The walk then keeps every case nearer than the k-th distance and fills up at it.
        const nearer = d.flatMap((di, i) => (di < kth ? [i + 1] : []));
        expect(walkedSet.length).toBe(k);
        expect(nearer.every((i) => walkedSet.includes(i))).toBe(true);
        expect(walkedSet.every((i) => d[i - 1] <= kth)).toBe(true);
      }
    }
    // Both outcomes, and windows at either end of the candidates, were exercised.
    expect(windows).toBeGreaterThan(5000);
    expect(ties).toBeGreaterThan(2000);
    expect(edges).toBeGreaterThan(2000);
  });
});

// Upper 0.1 % points of the chi-square distribution, df = 1 … 12, from SciPy 1.10.1
// (scipy.stats.chi2.ppf(0.999, df), Debian python3-scipy).
const CHI2_999 = [10.8276, 13.8155, 16.2662, 18.4668, 20.515, 22.4577, 24.3219, 26.1245, 27.8772, 29.5883, 31.2641, 32.9095];

describe('uniform-kernel draws: the window path and the walk give the same distribution', () => {
  // 60 cases, predictors 0, 0, 1, 1, …, 29, 29 (every value twice: ties), error of case i is
  // 1000·(i + 1), so a drawn value names its case. Each call has 2000 members at the same value and
  // 2000 draws: one draw per member, and each member settles a tie at the k-th distance with its own
  // random choice, so the draws are independent and follow the kernel's marginal probabilities.
  const preds = Array.from({ length: 60 }, (_, i) => Math.floor(i / 2));
  const archive = buildArchiveFromSeries({ corrected: preds, observed: preds.map((p, i) => p + 1000 * (i + 1)), dayOfYear: preds.map(() => 1), templateLength: 1 });
  const M = 2000;

  function counts(x: number, k: number, walkNeighbours: boolean): Map<number, number> {
    const c = new Map<number, number>();
    for (let seed = 1; seed <= 10; seed++) {
      const r = runStochasticStage(archive, { members: new Float64Array(M).fill(x), nMembers: M, nLeads: 1 }, { seed, nDraws: M, k, kernel: 'uniform', shuffle: false, keepTrajectories: true, walkNeighbours });
      for (const v of r.trajectories!) {
        const i = Math.round((v - x) / 1000) - 1;
        c.set(i, (c.get(i) ?? 0) + 1);
      }
    }
    return c;
  }

  // Queries: one set (middle, both ends of the archive) and ties at the k-th distance (one side,
  // both sides, no case nearer than the tie, the top end).
  const queries: { x: number; k: number; tie: boolean }[] = [
    { x: 10, k: 6, tie: false },
    { x: 0, k: 2, tie: false },
    { x: 29, k: 4, tie: false },
    { x: 10, k: 5, tie: true },
    { x: 10.25, k: 3, tie: true },
    { x: 10.5, k: 3, tie: true },
    { x: 100, k: 3, tie: true },
  ];
  for (const { x, k, tie } of queries) {
    it(`x = ${x}, k = ${k}${tie ? ' (tie at the k-th distance)' : ''}`, () => {
      // Expected probability per case: 1/k for each case nearer than the k-th distance; the rest of
      // the k places shared evenly by the cases at it (Lall & Sharma's uniform kernel, ties at random).
      const d = preds.map((p) => Math.abs(p - x));
      const kth = [...d].sort((a, b) => a - b)[k - 1];
      const nearer = d.filter((di) => di < kth).length;
      const at = d.filter((di) => di === kth).length;
      expect(at > k - nearer).toBe(tie);
      const cells = d.flatMap((di, i) => (di <= kth ? [i] : []));
      const expected = cells.map((i) => (d[i] < kth ? 1 / k : (k - nearer) / at / k));
      const total = 10 * M;
      const fast = counts(x, k, false);
      const walk = counts(x, k, true);
      const df = cells.length - 1;
      const critical = CHI2_999[df - 1];
      for (const c of [fast, walk]) {
        // Nothing outside the k nearest, and Pearson's goodness of fit to the kernel's probabilities.
        expect([...c.keys()].every((i) => cells.includes(i))).toBe(true);
        const chi2 = cells.reduce((s, i, j) => s + ((c.get(i) ?? 0) - total * expected[j]) ** 2 / (total * expected[j]), 0);
        expect(chi2).toBeLessThan(critical);
      }
      // Pearson's test of homogeneity between the two paths (2 × cells table, equal row totals).
      const homogeneity = cells.reduce((s, i) => {
        const a = fast.get(i) ?? 0;
        const b = walk.get(i) ?? 0;
        const e = (a + b) / 2;
        return s + ((a - e) ** 2 + (b - e) ** 2) / e;
      }, 0);
      expect(homogeneity).toBeLessThan(critical);
    });
  }
});
