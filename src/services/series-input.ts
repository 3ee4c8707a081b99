import { parseRfc3339 } from '../core/rfc3339.ts';
import { valueProblem, type ValueLimit } from './plausible-values.ts';
import type { ErrorList } from './problem.ts';

/** Parses one RFC 3339 time strictly (src/core/rfc3339.ts); NaN when it is not a real one. */
export function parseTime(text: unknown): number {
  return parseRfc3339(text) ?? NaN;
}

/** What a refused time is told. */
export const TIME_MESSAGE = 'not a real RFC 3339 time with offset, e.g. 2024-05-01T00:00:00Z (impossible days such as 02-30 and hours such as 24:00 are refused, not rolled over)';

/**
 * Checks a batch's times: RFC 3339 with offset, on the gauge's step (multiples of the step from
 * 1970-01-01T00:00Z, so daily values are stamped at 00:00 UTC), strictly increasing.
 * Returns epoch milliseconds. `where(i)` names the field or CSV line of the i-th time.
 */
export function checkTimes(times: readonly unknown[], stepSeconds: number, where: (i: number) => string, errors: ErrorList): Float64Array {
  const out = new Float64Array(times.length);
  const stepMs = stepSeconds * 1000;
  for (let i = 0; i < times.length; i++) {
    const t = parseTime(times[i]);
    out[i] = t;
    if (Number.isNaN(t)) {
      errors.add(where(i), `${TIME_MESSAGE}: ${JSON.stringify(times[i])}`);
    } else if (t % stepMs !== 0) {
      errors.add(where(i), `${times[i]} is not on the gauge's time step of ${stepSeconds} s (times are multiples of the step from 1970-01-01T00:00:00Z)`);
    } else if (i > 0 && !Number.isNaN(out[i - 1])) {
      if (t === out[i - 1]) errors.add(where(i), `duplicate time ${times[i]}`);
      else if (t < out[i - 1]) errors.add(where(i), `times must be increasing: ${times[i]} comes after ${String(times[i - 1])}`);
    }
    if (errors.full) break;
  }
  return out;
}

/**
 * Checks values: finite numbers or null (missing), within the quantity's plausible range for the
 * gauge (src/services/plausible-values.ts). Returns a Float64Array with NaN for missing.
 */
export function checkValues(values: readonly unknown[], limit: ValueLimit, where: (i: number) => string, errors: ErrorList): Float64Array {
  const out = new Float64Array(values.length);
  for (let i = 0; i < values.length; i++) {
    const v = values[i];
    if (v === null) {
      out[i] = NaN;
      continue;
    }
    const problem = typeof v !== 'number' || !Number.isFinite(v) ? `${limit.quantity} must be a finite number or null, got ${JSON.stringify(v) ?? String(v)}` : valueProblem(v, limit);
    if (problem) {
      errors.add(where(i), problem);
      if (errors.full) break;
    } else out[i] = v as number;
  }
  return out;
}

/** A plain decimal, optionally with an exponent: no hex, binary, Infinity, NaN, separators or junk. */
const DECIMAL = /^[+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?$/;

/** A CSV cell as a number: empty = missing (null); anything else must be a plain decimal (else the text is returned, for the error). */
export function csvNumber(cell: string): number | null | string {
  const s = cell.trim();
  if (s === '' || (s.length === 4 && s.toLowerCase() === 'null')) return null;
  if (!DECIMAL.test(s)) return s;
  const n = Number(s);
  return Number.isFinite(n) ? n : s;
}

export function isoUtc(ms: number): string {
  return new Date(ms).toISOString().replace('.000Z', 'Z');
}

/** Known forcing variables and their units; other names are allowed with any declared unit. */
export const knownForcingUnits: Record<string, { unit: string; aliases: string[]; nonNegative: boolean }> = {
  precipitation: { unit: 'mm', aliases: ['mm'], nonNegative: true },
  air_temperature: { unit: 'degC', aliases: ['degC', '°C', 'C'], nonNegative: false },
  potential_evaporation: { unit: 'mm', aliases: ['mm'], nonNegative: true },
};

export function checkFlowUnit(unit: unknown, where: string, errors: ErrorList): void {
  if (unit !== 'm3/s' && unit !== 'm³/s') errors.add(where, `flow unit must be m3/s, got ${JSON.stringify(unit)}`);
}
