// Daily UTC calendar helpers for the scenario.
export const DAY_MS = 86_400_000;

/** Day of year, 1 January = 1 (UTC). */
export function dayOfYearUtc(ms: number): number {
  const year = new Date(ms).getUTCFullYear();
  return Math.floor((ms - Date.UTC(year, 0, 1)) / DAY_MS) + 1;
}

export function yearUtc(ms: number): number {
  return new Date(ms).getUTCFullYear();
}

/** RFC 3339 UTC without milliseconds, e.g. 2005-01-01T00:00:00Z. */
export function isoUtc(ms: number): string {
  return new Date(ms).toISOString().replace('.000Z', 'Z');
}
