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

// ── Answers ──────────────────────────────────────────────────────────────────────────────────
// What the routes send back, as zod schemas: the OpenAPI document's response schemas are
// generated from these (src/api/openapi.ts), and test/api/openapi.test.ts checks real answers
// against the document. Nested reports whose parts are described in the README (scores,
// verification, hindcasts) are documented by their top-level fields and stay open below them.

const Time = z.string().describe('RFC 3339, UTC');
const Open = z.record(z.string(), z.unknown());

export const StoredThreshold = z.object({
  label: z.string(),
  value: z.number().describe('flow, m3/s (the same as `flow`)'),
  flow: z.number(),
  level: z.number().nullable().describe('water level, m, through the rating curve in force now; null without one or outside it'),
  given: z.enum(['flow', 'level']),
  outsideCurve: z.literal(true).optional(),
});

export const GaugeAnswer = z.object({
  id: z.string(),
  name: z.string(),
  catchmentAreaKm2: z.number(),
  timeStep: z.string(),
  stepSeconds: z.number().int(),
  timeZone: z.string().describe('IANA time zone the page shows times in (UTC on the wire)'),
  flowUnit: z.string(),
  location: z.object({ latitude: z.number(), longitude: z.number(), elevationM: z.number().optional() }).nullable(),
  thresholds: z.array(StoredThreshold),
  ratingCurve: z.object({ validFrom: Time, stageRange: z.object({ from: z.number(), to: z.number() }), versions: z.number().int() }).nullable(),
  updatingMaxAgeSteps: z.number().int(),
  maxFlow: z.number().nullable().describe('flow cap set on the gauge (m3/s); null = derived (see limitsInForce)'),
  maxPrecipitation: z.number().nullable().describe('precipitation cap per step set on the gauge (mm); null = default'),
  airTemperatureRange: z.object({ min: z.number(), max: z.number() }).nullable().describe('air temperature range set on the gauge (degC); null = default'),
  limitsInForce: z
    .object({
      maxFlow: z.object({ value: z.number(), source: z.enum(['gauge', 'archive', 'storage']) }),
      maxPrecipitation: z.object({ value: z.number(), source: z.enum(['gauge', 'default']) }),
      airTemperatureRange: z.object({ min: z.number(), max: z.number(), source: z.enum(['gauge', 'default']) }),
    })
    .describe('the value limits ingest and runs are checked against, and where each comes from'),
  createdAt: Time,
  updatedAt: Time,
});

export const DriftStatus = z.enum(['ok', 'drifting', 'insufficient-data', 'no-forecast']);

export const GaugeStatusAnswer = z.object({
  gaugeId: z.string(),
  status: z.string(),
  modelVersionId: z.string().nullable(),
  reasons: z.array(z.string()),
  evidence: Open,
  computedAt: Time,
});

export const GaugeDetailAnswer = GaugeAnswer.extend({
  archive: z.record(z.string(), z.number().int()).describe('values held per kind of archive data'),
  status: DriftStatus,
  drift: GaugeStatusAnswer.nullable(),
});

export const JobAnswer = z.object({
  id: z.string(),
  kind: z.string(),
  gaugeId: z.string().nullable(),
  params: z.unknown(),
  status: z.enum(['queued', 'running', 'succeeded', 'failed', 'cancelled']),
  stage: z.string(),
  percent: z.number(),
  cancelRequested: z.boolean(),
  result: z.unknown(),
  error: z.string().nullable(),
  createdBy: z.string().nullable(),
  claimedBy: z.string().nullable(),
  heartbeatAt: Time.nullable(),
  createdAt: Time,
  startedAt: Time.nullable(),
  finishedAt: Time.nullable(),
});

const Members = z.array(z.object({ id: z.string(), values: z.array(z.number()) }));

/** One corrected run as stored and served (src/services/forecast-view.ts). */
export const ForecastAnswer = z.object({
  id: z.string(),
  gaugeId: z.string(),
  gaugeName: z.string(),
  issueTime: Time,
  createdAt: Time,
  source: z.string(),
  unit: z.literal('m3/s'),
  timeStep: z.string(),
  caution: z.string().describe('warnings are decided by the responsible local authority'),
  status: z.enum(['corrected', 'degraded']),
  degradedReason: z.string().nullable(),
  modelVersion: z.object({ id: z.string(), label: z.string() }).nullable(),
  errorArchive: z
    .object({
      id: z.string(),
      kind: z.enum(['corrected', 'raw']),
      leadMode: z.enum(['lead-free', 'per-lead', 'updating']),
      leadTimes: z.number(),
      cases: z.number(),
      templates: z.number(),
      leadGrowth: z.object({ source: z.enum(['past-runs', 'none']), note: z.string() }).optional().describe("where the errors' growth with lead time comes from"),
    })
    .optional(),
  updating: z
    .object({
      status: z.enum(['on', 'off']),
      reason: z.string().nullable(),
      observation: z.object({ time: Time, value: z.number(), source: z.enum(['run', 'archive']), ageSteps: z.number() }).nullable(),
      method: z.enum(['ar1', 'phi-per-lead']).nullable(),
    })
    .optional(),
  seed: z.number(),
  trajectories: z.number().int(),
  attentionLevel: z.number(),
  leadTimes: z.array(z.string()),
  validTimes: z.array(Time),
  input: z
    .object({
      form: z.enum(['json', 'csv', 'netcdf']),
      unit: z.string(),
      conversion: z.object({ from: z.string(), to: z.literal('m3/s'), factor: z.number(), source: z.string() }).nullable(),
      warmup: z.object({ stepsInRun: z.number(), stepsNeeded: z.number(), fromArchive: z.array(z.object({ series: z.string(), from: Time, to: Time, steps: z.number() })) }),
    })
    .optional()
    .describe('how the run was read: form, unit, conversion, warm-up taken from the archive'),
  quantiles: z.object({
    probabilities: z.array(z.number()),
    values: z.array(z.array(z.number())),
    levels: z.array(z.array(z.number().nullable())).optional().describe('the same quantiles as water levels (m); absent without a rating curve'),
  }),
  ratingCurve: z.object({ validFrom: Time, beforeFirst: z.boolean(), stageUnit: z.literal('m') }).optional(),
  thresholds: z.array(
    z.object({
      label: z.string(),
      value: z.number(),
      flow: z.number().optional(),
      level: z.number().nullable().optional(),
      given: z.enum(['flow', 'level']).optional(),
      exceedance: z.array(z.number()),
      exceedanceStandardError: z.array(z.number()).optional(),
      anyTime: z.number(),
      anyTimeStandardError: z.number().optional(),
      firstLikelyLeadTime: z.string().nullable(),
      attention: z.boolean(),
    }),
  ),
  probabilityNote: z.string().optional(),
  members: z.enum(['none', 'corrected']).optional().describe('present when members=none|corrected trimmed the member series'),
  memberCount: z.number().int().optional().describe('members of the run, when the series were trimmed'),
  ensemble: z
    .object({ raw: Members.optional().describe('absent with members=corrected'), corrected: Members.nullable().describe('null for a degraded run') })
    .optional()
    .describe('absent with members=none'),
  recent: z.object({ times: z.array(Time), observed: z.array(z.number().nullable()) }),
  timings: z.object({ featuresMs: z.number(), inferenceMs: z.number(), stochasticMs: z.number(), totalMs: z.number() }),
});

export const RunSummaryAnswer = z.object({ label: z.string(), value: z.number(), maxExceedance: z.number(), anyTime: z.number().nullable(), attention: z.boolean() });

export const ModelVersionAnswer = z.looseObject({
  id: z.string(),
  gaugeId: z.string(),
  origin: z.enum(['fitted', 'uploaded']),
  label: z.string(),
  featureSpec: z.unknown(),
  trainer: Open,
  periods: Open,
  scores: Open.describe('validation scores (see the README: residual models, updating, neighbours)'),
  createdBy: z.string().nullable(),
  createdAt: Time,
  active: z.boolean(),
  activatedAt: Time.nullable(),
  parts: z.number().int(),
  updating: z.unknown(),
});

/** What an archive write reports: values received and written (upserts by natural key). */
export const IngestAnswer = z.looseObject({ gaugeId: z.string(), received: z.number().int(), written: z.number().int() });

export const Series = z.object({ name: z.string(), unit: z.string().nullable(), values: z.array(z.union([z.number(), z.string(), z.null()])) });
