// Matérn covariance with ν = 5/2 (Rasmussen & Williams 2006, eq. 4.17):
// k(r) = σ² (1 + √5 r + 5r²/3) exp(−√5 r), r the distance scaled per dimension (ARD).
const SQRT5 = Math.sqrt(5);

/** Correlation at scaled distance r (σ² = 1). */
export function matern52(r: number): number {
  const s = SQRT5 * r;
  return (1 + s + (s * s) / 3) * Math.exp(-s);
}

/** Scaled distance between row i of `a` and row j of `b` (both row-major with d columns). */
export function scaledDistance(
  a: Float64Array, i: number, b: Float64Array, j: number, d: number, lengthScales: ArrayLike<number>,
): number {
  let s = 0;
  for (let k = 0; k < d; k++) {
    const t = (a[i * d + k] - b[j * d + k]) / lengthScales[k];
    s += t * t;
  }
  return Math.sqrt(s);
}
