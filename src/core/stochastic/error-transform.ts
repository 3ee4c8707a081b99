/**
 * Space in which errors are archived and added: error = T(observed) − T(corrected), and a new
 * value is T⁻¹(T(corrected) + error), clipped at 0 (flows are never negative).
 *  - none:   T(x) = x (additive errors);
 *  - log:    T(x) = ln(x + offset)  (multiplicative errors, for heteroscedastic rivers);
 *  - boxcox: T(x) = ((x + offset)^λ − 1)/λ, ln(x + offset) for λ = 0 (Box & Cox 1964); λ ≥ 0.
 * Inputs are clipped at 0 before transforming. offset > 0 keeps zero flows finite.
 */
export type ErrorTransform =
  | { kind: 'none' }
  | { kind: 'log'; offset: number }
  | { kind: 'boxcox'; lambda: number; offset: number };

/** What a caller may pass to a builder: the offset may be left out (see resolveTransform). */
export type ErrorTransformSpec =
  | { kind: 'none' }
  | { kind: 'log'; offset?: number }
  | { kind: 'boxcox'; lambda: number; offset?: number };

/**
 * Fills in a missing offset as 1 % of the mean observed flow (at least 1e-6): small against
 * typical flows but keeps ln finite at zero flow (common practice, no published source).
 */
export function resolveTransform(spec: ErrorTransformSpec, observed: ArrayLike<number | null>): ErrorTransform {
  if (spec.kind === 'none') return { kind: 'none' };
  let offset = spec.offset;
  if (offset === undefined) {
    let s = 0;
    let n = 0;
    for (let i = 0; i < observed.length; i++) {
      const v = observed[i];
      if (v !== null && Number.isFinite(v)) {
        s += Math.max(v, 0);
        n++;
      }
    }
    offset = Math.max(1e-6, n ? (0.01 * s) / n : 1e-6);
  }
  const t: ErrorTransform = spec.kind === 'log' ? { kind: 'log', offset } : { kind: 'boxcox', lambda: spec.lambda, offset };
  checkTransform(t);
  return t;
}

export function checkTransform(t: ErrorTransform): void {
  if (t.kind === 'none') return;
  if (!(t.offset >= 0) || !Number.isFinite(t.offset)) throw new RangeError('transform offset must be a finite number ≥ 0');
  if (t.kind === 'log' && !(t.offset > 0)) throw new RangeError('log transform needs offset > 0');
  if (t.kind === 'boxcox') {
    // λ < 0 is refused: its back-transform runs to infinite flow for large positive errors.
    if (!(t.lambda >= 0) || !Number.isFinite(t.lambda)) throw new RangeError('Box-Cox lambda must be a finite number ≥ 0');
    if (t.lambda === 0 && !(t.offset > 0)) throw new RangeError('Box-Cox with lambda = 0 needs offset > 0');
  }
  if (t.kind !== 'log' && t.kind !== 'boxcox') throw new RangeError(`unknown transform ${(t as { kind: string }).kind}`);
}

/** T(x) for a flow x (clipped at 0 first). */
export function forwardTransform(t: ErrorTransform, x: number): number {
  const v = x > 0 ? x : 0;
  switch (t.kind) {
    case 'none':
      return v;
    case 'log':
      return Math.log(v + t.offset);
    case 'boxcox':
      return t.lambda === 0 ? Math.log(v + t.offset) : (Math.pow(v + t.offset, t.lambda) - 1) / t.lambda;
  }
}

/** T⁻¹(z), clipped at 0; a Box–Cox value below the transform's range maps to 0. */
export function inverseTransform(t: ErrorTransform, z: number): number {
  let x: number;
  switch (t.kind) {
    case 'none':
      x = z;
      break;
    case 'log':
      x = Math.exp(z) - t.offset;
      break;
    case 'boxcox': {
      if (t.lambda === 0) x = Math.exp(z) - t.offset;
      else {
        const base = t.lambda * z + 1;
        x = base > 0 ? Math.pow(base, 1 / t.lambda) - t.offset : 0;
      }
      break;
    }
  }
  return x > 0 ? x : 0;
}
