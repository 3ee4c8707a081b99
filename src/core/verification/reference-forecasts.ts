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
  /**
   * CRPS of the climatological ensemble for observation y (NaN when empty); with r, the
   * threshold-weighted CRPS above r (values and y cut at r from below, as
   * thresholdWeightedCrpsSorted). O(log m) per call from prefix sums kept per day of the year.
   */
  crpsAt(validMs: number, y: number, r?: number): number;
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
  // Per slot (and cut level r): sorted values v, prefix sums P, and the spread term S/m².
  // Keyed by cut level (NaN = uncut), then slot: a lookup per call without building a key string.
  type Sums = { v: Float64Array; P: Float64Array; spread: number };
  const sums = new Map<number, (Sums | undefined)[]>();
  const sumsAt = (s: number, r: number | undefined) => {
    const level = r === undefined ? NaN : r;
    let bySlotSums = sums.get(level);
    if (!bySlotSums) sums.set(level, (bySlotSums = new Array<Sums | undefined>(DAYS)));
    let e = bySlotSums[s];
    if (!e) {
      const base = valuesAtSlot(s);
      const v = r === undefined ? base : Float64Array.from(base, (x) => (x > r ? x : r));
      const m = v.length;
      const P = new Float64Array(m + 1);
      let spread = 0;
      for (let j = 0; j < m; j++) {
        P[j + 1] = P[j] + v[j];
        spread += (2 * (j + 1) - m - 1) * v[j];
      }
      e = { v, P, spread: m ? spread / (m * m) : NaN };
      bySlotSums[s] = e;
    }
    return e;
  };
  const valuesAtSlot = (s: number): Float64Array => {
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
  };
  return {
    size,
    valuesAt: (validMs: number) => valuesAtSlot(slot(validMs)),
    crpsAt(validMs: number, y: number, r?: number): number {
      const { v, P, spread } = sumsAt(slot(validMs), r);
      const m = v.length;
      if (m === 0) return NaN;
      const yy = r === undefined || y > r ? y : r;
      // k values ≤ yy: Σ|x − yy| = yy·k − P[k] + (P[m] − P[k]) − yy·(m − k).
      let lo = 0;
      let hi = m;
      while (lo < hi) {
        const mid = (lo + hi) >> 1;
        if (v[mid] <= yy) lo = mid + 1;
        else hi = mid;
      }
      const k = lo;
      const abs = yy * k - P[k] + (P[m] - P[k]) - yy * (m - k);
      return abs / m - spread;
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
