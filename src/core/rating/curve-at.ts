/**
 * The rating curve version in force at a time: the latest one valid from at or before it. A time
 * before the first version takes the first, and says so (`beforeFirst`), rather than having none.
 * `versions` in ascending validFromMs.
 */
export function curveAt<V extends { validFromMs: number }>(versions: readonly V[], timeMs: number): { version: V; beforeFirst: boolean } | null {
  if (versions.length === 0) return null;
  let found: V | null = null;
  for (const v of versions) if (v.validFromMs <= timeMs) found = v;
  return found ? { version: found, beforeFirst: false } : { version: versions[0], beforeFirst: true };
}
