/**
 * The one parser of wire times: RFC 3339 date-times (the ISO 8601 profile of RFC 3339 section 5.6)
 * with a `Z` or ±hh:mm offset. Unlike Date.parse it never rolls an impossible time over to a real
 * one: 2023-02-29, 04-31 and T24:00 are refused (RFC 3339 section 5.7: the day is within its
 * month, hours 00–23). A leap second (:60) is refused too, as the store has no way to hold it,
 * and so are fractions finer than a millisecond that are not zero.
 */
const PATTERN = /^(\d{4})-(\d{2})-(\d{2})T(\d{2}):(\d{2})(?::(\d{2})(?:\.(\d{1,9}))?)?(?:(Z)|([+-])(\d{2}):(\d{2}))$/;

const DAYS = [31, 28, 31, 30, 31, 30, 31, 31, 30, 31, 30, 31];

/** Gregorian leap year (ISO 8601 uses the proleptic Gregorian calendar). */
function isLeap(year: number): boolean {
  return (year % 4 === 0 && year % 100 !== 0) || year % 400 === 0;
}

/** Epoch milliseconds of an RFC 3339 time with offset, or null when it is not a real one. */
export function parseRfc3339(text: unknown): number | null {
  if (typeof text !== 'string') return null;
  const m = PATTERN.exec(text);
  if (!m) return null;
  const [, ys, mos, ds, hs, mis, ss, frac, z, sign, ohs, oms] = m;
  const year = Number(ys);
  const month = Number(mos);
  const day = Number(ds);
  const hour = Number(hs);
  const minute = Number(mis);
  const second = ss === undefined ? 0 : Number(ss);
  if (month < 1 || month > 12 || day < 1) return null;
  if (day > (month === 2 && isLeap(year) ? 29 : DAYS[month - 1])) return null;
  if (hour > 23 || minute > 59 || second > 59) return null;
  if (frac !== undefined && frac.length > 3 && !/^0+$/.test(frac.slice(3))) return null;
  const ms = frac === undefined ? 0 : Number(frac.slice(0, 3).padEnd(3, '0'));
  let offsetMinutes = 0;
  if (!z) {
    const oh = Number(ohs);
    const om = Number(oms);
    if (oh > 23 || om > 59) return null;
    offsetMinutes = (sign === '-' ? -1 : 1) * (oh * 60 + om);
  }
  // setUTCFullYear keeps years below 100 as they are (Date.UTC would read 0099 as 1999).
  const d = new Date(0);
  d.setUTCFullYear(year, month - 1, day);
  d.setUTCHours(hour, minute, second, ms);
  return d.getTime() - offsetMinutes * 60_000;
}

/** For times already checked by the wire schema: epoch milliseconds, throwing if it is not one. */
export function rfc3339Ms(text: string): number {
  const ms = parseRfc3339(text);
  if (ms === null) throw new RangeError(`not an RFC 3339 time: ${JSON.stringify(text)}`);
  return ms;
}
