// Search space: named parameters mapped to and from the unit cube the surrogate works in.
// 'float' is linear, 'logfloat' linear in the logarithm, 'int' linear then rounded.

export type ParamKind = 'float' | 'int' | 'logfloat';

export interface SearchParam {
  name: string;
  kind: ParamKind;
  low: number;
  high: number;
}

export type Params = Record<string, number>;

export function checkSpace(space: SearchParam[]): void {
  if (space.length === 0) throw new RangeError('search space is empty');
  const seen = new Set<string>();
  for (const p of space) {
    if (seen.has(p.name)) throw new RangeError(`parameter ${p.name} declared twice`);
    seen.add(p.name);
    if (!(Number.isFinite(p.low) && Number.isFinite(p.high) && p.low < p.high)) {
      throw new RangeError(`parameter ${p.name}: need finite low < high`);
    }
    if (p.kind === 'logfloat' && !(p.low > 0)) throw new RangeError(`parameter ${p.name}: logfloat needs low > 0`);
    if (p.kind === 'int' && !(Number.isInteger(p.low) && Number.isInteger(p.high))) {
      throw new RangeError(`parameter ${p.name}: int needs integer bounds`);
    }
  }
}

/** Unit-cube coordinate u ∈ [0, 1] → parameter value. */
export function decodeValue(p: SearchParam, u: number): number {
  const c = Math.min(1, Math.max(0, u));
  if (p.kind === 'logfloat') {
    if (c === 0 || c === 1) return c === 0 ? p.low : p.high; // exact ends despite exp/log rounding
    return Math.min(p.high, Math.max(p.low, p.low * Math.exp(c * Math.log(p.high / p.low))));
  }
  const v = p.low + c * (p.high - p.low);
  return p.kind === 'int' ? Math.round(v) : v;
}

/** Parameter value → unit-cube coordinate. */
export function encodeValue(p: SearchParam, v: number): number {
  if (p.kind === 'logfloat') return Math.log(v / p.low) / Math.log(p.high / p.low);
  return (v - p.low) / (p.high - p.low);
}

export function decodePoint(space: SearchParam[], u: ArrayLike<number>, offset = 0): Params {
  const out: Params = {};
  space.forEach((p, k) => (out[p.name] = decodeValue(p, u[offset + k])));
  return out;
}

/** Writes the unit-cube point of `params` at out[offset…]. */
export function encodePoint(space: SearchParam[], params: Params, out: Float64Array, offset = 0): void {
  space.forEach((p, k) => (out[offset + k] = encodeValue(p, params[p.name])));
}
