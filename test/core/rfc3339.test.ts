import { describe, expect, it } from 'vitest';
import { parseRfc3339 } from '../../src/core/rfc3339.ts';

// RFC 3339 section 5.6 (grammar) and 5.7 (restrictions: day within the month's length, leap years
// by the Gregorian rule of ISO 8601); Date.parse rolls impossible dates over, this parser refuses them.
describe('strict RFC 3339 times', () => {
  it.each([
    ['2024-02-29T00:00:00Z', Date.UTC(2024, 1, 29)], // 2024 is a leap year (divisible by 4)
    ['2000-02-29T00:00:00Z', Date.UTC(2000, 1, 29)], // divisible by 400: leap
    ['2023-03-01T23:59:59Z', Date.UTC(2023, 2, 1, 23, 59, 59)],
    ['2023-03-01T01:00:00+02:00', Date.UTC(2023, 1, 28, 23)],
    ['2023-03-01T00:00Z', Date.UTC(2023, 2, 1)],
    ['2023-03-01T00:00:00.250Z', Date.UTC(2023, 2, 1, 0, 0, 0, 250)],
  ])('accepts %s', (text, ms) => {
    expect(parseRfc3339(text)).toBe(ms);
  });

  it('reads years below 100 as themselves, not as 19xx', () => {
    const d = new Date(0);
    d.setUTCFullYear(99, 0, 1);
    expect(parseRfc3339('0099-01-01T00:00:00Z')).toBe(d.getTime());
  });

  it.each([
    '2023-02-29T00:00:00Z', // 2023 is not a leap year
    '1900-02-29T00:00:00Z', // divisible by 100, not by 400: not leap
    '2023-02-30T00:00:00Z',
    '2023-04-31T00:00:00Z',
    '2023-06-31T00:00:00Z',
    '2023-13-01T00:00:00Z',
    '2023-00-10T00:00:00Z',
    '2023-01-00T00:00:00Z',
    '2023-03-01T24:00:00Z',
    '2023-03-01T23:60:00Z',
    '2023-03-01T23:59:60Z', // a leap second cannot be stored as a time of the step grid
    '2023-03-01T00:00:00+24:00',
    '2023-03-01T00:00:00+05:60',
    '2023-03-01T00:00:00', // no offset
    '2023-03-01',
    '2023-3-1T00:00:00Z',
    ' 2023-03-01T00:00:00Z',
    '2023-03-01T00:00:00.0001Z', // below a millisecond: not representable, refused rather than cut
    '+002023-03-01T00:00:00Z',
  ])('refuses %s', (text) => {
    expect(parseRfc3339(text)).toBeNull();
  });

  it('refuses what is not a string', () => {
    expect(parseRfc3339(20230301 as unknown)).toBeNull();
    expect(parseRfc3339(null)).toBeNull();
  });
});
