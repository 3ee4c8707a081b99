// The shapes of the JSONB columns, read back through zod so a repository hands out typed values
// (and a row that does not fit fails loudly instead of travelling on as `unknown`). Objects that
// grow new keys over time (scores, trainer, archive summaries, evidence) keep keys they do not name.
import { z } from 'zod';

/** A stored period, RFC 3339 times. */
export const PeriodText = z.object({ from: z.string(), to: z.string() });

/**
 * model_versions.periods: calibration (fitted models) and validation; newer fits also the
 * validation's early-stopping and held-out archive blocks, and where the archives' errors came from.
 */
export const VersionPeriods = z.looseObject({
  calibration: PeriodText.optional(),
  validation: PeriodText.optional(),
  stopping: PeriodText.optional(),
  archive: PeriodText.optional(),
  archiveSource: z.string().optional(),
});

/** Open-ended JSON objects: model_versions.trainer and .scores, gauge_status.evidence. */
export const JsonObject = z.record(z.string(), z.unknown());

/** error_archives.summary: counts and the archive's reach (lead-free: templateLength; per-lead: nLeads and issues). */
export const ArchiveSummary = z.looseObject({
  cases: z.number().optional(),
  templates: z.number().optional(),
  templateLength: z.number().optional(),
  nLeads: z.number().optional(),
  issues: z.number().optional(),
  members: z.number().optional(),
  transform: z.unknown().optional(),
});

/** gauges.thresholds (the embedded store may hand JSON text back): each a flow `value` (m3/s) or a water `level` (m). */
export const Thresholds = z.preprocess(
  (v) => (typeof v === 'string' ? JSON.parse(v) : v),
  z.array(z.union([z.object({ label: z.string(), value: z.number() }), z.object({ label: z.string(), level: z.number() })])),
);

/** rating_curves.segments. */
export const RatingSegmentsColumn = z.preprocess(
  (v) => (typeof v === 'string' ? JSON.parse(v) : v),
  z.array(z.object({ fromStage: z.number(), toStage: z.number(), a: z.number(), b: z.number(), h0: z.number() })),
);

/** gauge_status.reasons. */
export const Reasons = z.array(z.string());

/** drift_references.basis: the hindcast a level was measured by. */
export const DriftBasis = z.object({ jobId: z.string(), mode: z.enum(['simulation', 'reforecast']), period: PeriodText, cases: z.number() });

/** forecast_runs.summary: per threshold, what the overview shows. */
export const RunSummary = z.array(z.looseObject({ label: z.string(), value: z.number(), maxExceedance: z.number(), anyTime: z.number().nullable(), attention: z.boolean() }));

/** The parts of forecast_runs.output that verification reads: valid times and the two ensembles (corrected is null for degraded runs). */
const MemberValues = z.array(z.object({ id: z.string(), values: z.array(z.number()) }));
export const RunValidTimes = z.array(z.string());
export const RunEnsembles = z.object({ raw: MemberValues, corrected: MemberValues.nullable() });

/** The thresholds of forecast_runs.output as issued: exceedance per lead and at any time in the horizon. */
export const RunIssuedThresholds = z.array(z.looseObject({ label: z.string(), value: z.number(), exceedance: z.array(z.number()), anyTime: z.number() }));
