// Cholesky factor of a symmetric positive-definite matrix and the triangular solves around it.
// Matrices are row-major Float64Array n×n; only the lower triangle of the factor is meaningful.

/** Writes L (lower, A = L Lᵀ) into `out`; returns false when A is not positive definite. */
export function cholesky(a: Float64Array, n: number, out: Float64Array): boolean {
  for (let i = 0; i < n; i++) {
    for (let j = 0; j <= i; j++) {
      let s = a[i * n + j];
      for (let k = 0; k < j; k++) s -= out[i * n + k] * out[j * n + k];
      if (i === j) {
        if (!(s > 0)) return false;
        out[i * n + i] = Math.sqrt(s);
      } else {
        out[i * n + j] = s / out[j * n + j];
      }
    }
    for (let j = i + 1; j < n; j++) out[i * n + j] = 0;
  }
  return true;
}

/** Solves L x = b in place (forward substitution). */
export function solveLower(l: Float64Array, n: number, b: Float64Array): void {
  for (let i = 0; i < n; i++) {
    let s = b[i];
    for (let k = 0; k < i; k++) s -= l[i * n + k] * b[k];
    b[i] = s / l[i * n + i];
  }
}

/** Solves Lᵀ x = b in place (back substitution). */
export function solveUpper(l: Float64Array, n: number, b: Float64Array): void {
  for (let i = n - 1; i >= 0; i--) {
    let s = b[i];
    for (let k = i + 1; k < n; k++) s -= l[k * n + i] * b[k];
    b[i] = s / l[i * n + i];
  }
}
