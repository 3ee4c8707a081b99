/** JSON-ready numbers: the wire has no NaN or Infinity, so undefined values become null. */
export function jsonNumber(x: number): number | null {
  return Number.isFinite(x) ? x : null;
}

/** Plain array of JSON-ready numbers from any array-like (typed arrays included). */
export function jsonNumbers(a: ArrayLike<number>): (number | null)[] {
  const out: (number | null)[] = new Array(a.length);
  for (let i = 0; i < a.length; i++) out[i] = jsonNumber(a[i]);
  return out;
}
