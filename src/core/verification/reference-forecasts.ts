import { yearFraction } from '../day-of-year.ts';

/**
 * Reference forecasts known at issue time, for skill scores.
 *
 * Seasonal climatology: the archived observations whose time of year lies within ±windowDays of
 * the valid time's, taken only from observations before `cutoffMs` (the first issue verified), so
 * every one of them was known when each forecast was issued. The values for one day of the year
 * are collected once and kept sorted (an ensemble of a few hundred values for a 30-year archive).
 *
 * Persistence: the last observation at or before the issue time, carried forward to every lead
 * (a point forecast: its CRPS is the absolute error).
 */
export interface SeasonalClimatology {
  /** Sorted climatological values for a valid time (empty when none). */
  valuesAt(validMs: number): Float64Array;
  /** Observations used (before the cutoff). */
  readonly size: number;
}

const DAYS = 366;

export function seasonalClimatology(
  times: ArrayLike<number>,
  values: ArrayLike<number | null>,
  cutoffMs: number,
  windowDays = 15,
): SeasonalClimatology {
  if (times.length !== values.length) throw new RangeError('times and values must have the same length');
  if (!(windowDays >= 0 && windowDays <= 183)) throw new RangeError('windowDays must be in [0, 183]');
  const slot = (ms: number) => Math.min(DAYS - 1, Math.floor(yearFraction(ms) * DAYS));
  const bySlot: number[][] = Array.from({ length: DAYS }, () => []);
  let size = 0;
  for (let i = 0; i < times.length; i++) {
    const v = values[i];
    if (!(times[i] < cutoffMs) || v === null || !Number.isFinite(v)) continue;
    bySlot[slot(times[i])].push(v);
    size++;
  }
  const cache = new Map<number, Float64Array>();
  // The window in slots of 1/366 year (a day, within a fraction of a day).
  const w = Math.round(windowDays);
  return {
    size,
    valuesAt(validMs: number): Float64Array {
      const s = slot(validMs);
      let out = cache.get(s);
      if (!out) {
        const all: number[] = [];
        for (let d = -w; d <= w; d++) {
          const bucket = bySlot[(((s + d) % DAYS) + DAYS) % DAYS];
          for (const v of bucket) all.push(v);
        }
        out = Float64Array.from(all).sort();
        cache.set(s, out);
      }
      return out;
    },
  };
}

/**
 * Last observation at or before issueMs and no older than maxAgeMs, from times in ascending order
 * (binary search); NaN when there is none.
 */
export function persistenceValue(times: ArrayLike<number>, values: ArrayLike<number | null>, issueMs: number, maxAgeMs = Infinity): number {
  let lo = 0;
  let hi = times.length;
  while (lo < hi) {
    const mid = (lo + hi) >> 1;
    if (times[mid] <= issueMs) lo = mid + 1;
    else hi = mid;
  }
  for (let i = lo - 1; i >= 0 && issueMs - times[i] <= maxAgeMs; i--) {
    const v = values[i];
    if (v !== null && Number.isFinite(v)) return v;
  }
  return NaN;
}
