/**
 * Binomial lower tail P(X ≤ k) for X ~ Binomial(n, p), summed in log space from the pmf
 * recursion P(i + 1) = P(i)·(n − i)/(i + 1)·p/(1 − p), so large n neither underflows nor
 * overflows. O(k) work.
 */
export function binomialLowerTail(k: number, n: number, p: number): number {
  if (!Number.isInteger(n) || n < 0) throw new RangeError('n must be a non-negative integer');
  if (!(p >= 0 && p <= 1)) throw new RangeError('p must be in [0, 1]');
  if (k < 0) return 0;
  const kk = Math.floor(k);
  if (kk >= n) return 1;
  if (p === 0) return 1;
  if (p === 1) return 0;
  const lr = Math.log(p) - Math.log1p(-p);
  let lp = n * Math.log1p(-p); // log P(X = 0)
  const logs = new Float64Array(kk + 1);
  let max = -Infinity;
  for (let i = 0; i <= kk; i++) {
    logs[i] = lp;
    if (lp > max) max = lp;
    lp += Math.log((n - i) / (i + 1)) + lr;
  }
  let s = 0;
  for (let i = 0; i <= kk; i++) s += Math.exp(logs[i] - max);
  return Math.min(1, Math.exp(max) * s);
}
