// Fraction of the calendar year (UTC) elapsed at an epoch-millisecond time, in [0, 1).
// Uses the real year length (365 or 366 days) so 1 January 00:00 is always 0 and the
// seasonal features do not drift over leap years. Date.UTC returns a number: no allocation.
const MEAN_YEAR_MS = 365.2425 * 86_400_000;

export function yearFraction(ms: number): number {
  let year = 1970 + Math.floor(ms / MEAN_YEAR_MS);
  let start = Date.UTC(year, 0, 1);
  if (ms < start) {
    year -= 1;
    start = Date.UTC(year, 0, 1);
  }
  let end = Date.UTC(year + 1, 0, 1);
  if (ms >= end) {
    start = end;
    end = Date.UTC(year + 2, 0, 1);
  }
  return (ms - start) / (end - start);
}

/** Day of year 1 … 366 of an epoch-millisecond time (UTC). */
export function dayOfYearUtc(ms: number): number {
  const d = new Date(ms);
  return Math.floor((Date.UTC(d.getUTCFullYear(), d.getUTCMonth(), d.getUTCDate()) - Date.UTC(d.getUTCFullYear(), 0, 1)) / 86_400_000) + 1;
}
