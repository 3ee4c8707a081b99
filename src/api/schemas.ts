import { z } from 'zod';
import { parseDurationSeconds } from '../core/iso-duration.ts';
import { parseRfc3339 } from '../core/rfc3339.ts';
import { FLOAT32_MAX } from '../services/plausible-values.ts';

/** Shared pieces of the wire format. */

export const GaugeId = z
  .string()
  .regex(/^[a-z0-9](?:[a-z0-9-]{0,62}[a-z0-9])?$/, 'must be a slug: lowercase letters, digits and hyphens, 1–64 characters');

export const IsoDuration = z
  .string()
  .refine((s) => parseDurationSeconds(s) !== null, 'must be a fixed-length ISO 8601 duration such as PT1H or P1D');

export const TimeZone = z.string().refine((tz) => {
  try {
    new Intl.DateTimeFormat('en', { timeZone: tz });
    return true;
  } catch {
    return false;
  }
}, 'must be an IANA time zone such as UTC or Europe/Vienna');

/** m³/s is the one flow unit; both spellings are accepted on input. */
export const FlowUnit = z
  .string()
  .transform((u) => u.trim())
  .refine((u) => u === 'm3/s' || u === 'm³/s', 'flow unit must be m3/s')
  .transform(() => 'm3/s' as const);

export const Rfc3339 = z
  .string()
  .refine((s) => parseRfc3339(s) !== null, 'must be a real RFC 3339 time with offset, e.g. 2024-05-01T00:00:00Z (impossible days such as 02-30 and hours such as 24:00 are refused)');

/** A flood threshold: a flow `value` (m3/s) or a water `level` (m, needs the gauge's rating curve). */
export const Threshold = z
  .strictObject({
    label: z.string().trim().min(1).max(60),
    // At most what a float32 holds: flows are compared with the stored float32 quantiles.
    value: z.number().finite().positive().max(FLOAT32_MAX).optional().describe('flow, m3/s'),
    level: z.number().finite().optional().describe('water level (stage), m; turned into flow through the rating curve'),
  })
  .superRefine((t, ctx) => {
    if ((t.value === undefined) === (t.level === undefined)) {
      ctx.addIssue({ code: 'custom', path: ['value'], message: 'give either value (flow, m3/s) or level (water level, m)' });
    }
  });

/**
 * Thresholds rise strictly in the list's order; here among neighbours in the same unit, and across
 * units through the rating curves (src/services/rating.ts).
 */
export const Thresholds = z
  .array(Threshold)
  .max(10)
  .superRefine((list, ctx) => {
    for (let i = 1; i < list.length; i++) {
      const [a, b] = [list[i - 1], list[i]];
      if (a.value !== undefined && b.value !== undefined && !(b.value > a.value)) {
        ctx.addIssue({ code: 'custom', path: [i, 'value'], message: 'threshold values must be strictly increasing' });
      }
      if (a.level !== undefined && b.level !== undefined && !(b.level > a.level)) {
        ctx.addIssue({ code: 'custom', path: [i, 'level'], message: 'threshold levels must be strictly increasing' });
      }
    }
    const seen = new Set<string>();
    list.forEach((t, i) => {
      if (seen.has(t.label)) ctx.addIssue({ code: 'custom', path: [i, 'label'], message: 'duplicate label' });
      seen.add(t.label);
    });
  });

export const Location = z.strictObject({
  latitude: z.number().min(-90).max(90),
  longitude: z.number().min(-180).max(180),
  elevationM: z.number().finite().optional(),
});

export const TimeWindowQuery = z.strictObject({
  from: Rfc3339.optional(),
  to: Rfc3339.optional(),
  format: z.enum(['json', 'csv']).optional(),
});

/** A member is one parameter set of the raw model. */
export const MemberId = z.string().regex(/^[A-Za-z0-9][A-Za-z0-9_.-]{0,63}$/, 'must be 1–64 letters, digits, _ . or -');
