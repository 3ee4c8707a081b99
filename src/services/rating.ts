// Use cases around a gauge's rating curves: add and remove a version, check the gauge's thresholds
// against every version, and the conversion a run uses (the version in force at its issue time).
import { parseRfc3339, rfc3339Ms } from '../core/rfc3339.ts';
import { curveAt } from '../core/rating/curve-at.ts';
import { stageRange, type RatingSegment } from '../core/rating/rating-curve.ts';
import { ratingProblems, type RatingJoin } from '../core/rating/rating-problems.ts';
import { segmentFlow } from '../core/rating/segment-flow.ts';
import { thresholdProblems, type NamedCurve } from '../core/rating/threshold-problems.ts';
import { thresholdsInBothUnits, type GivenThreshold, type ThresholdInBothUnits } from '../core/rating/threshold-units.ts';
import type { Queryable } from '../store/db.ts';
import { getGauge, type Gauge } from '../store/gauges-repo.ts';
import { deleteRatingCurve, insertRatingCurve, listRatingCurves, type RatingCurveVersion } from '../store/rating-repo.ts';
import { conflict, invalid, notFound, type FieldError } from './problem.ts';
import { isoUtc } from './series-input.ts';

/** A rating curve version on the wire. */
export interface RatingCurveView {
  gaugeId: string;
  validFrom: string;
  units: { stage: 'm'; flow: 'm3/s' };
  segments: RatingSegment[];
  stageRange: { from: number; to: number };
  flowRange: { from: number; to: number };
  joinTolerance: number;
  /** Each join's flows from the segment below and above (equal on a continuous curve). */
  joins: RatingJoin[];
  note: string | null;
  createdAt: string;
}

export function ratingCurveView(v: RatingCurveVersion): RatingCurveView {
  const range = stageRange(v.segments);
  const first = v.segments[0];
  const last = v.segments[v.segments.length - 1];
  return {
    gaugeId: v.gaugeId,
    validFrom: isoUtc(v.validFromMs),
    units: { stage: 'm', flow: 'm3/s' },
    segments: v.segments,
    stageRange: range,
    flowRange: { from: round(segmentFlow(first, range.from)), to: round(segmentFlow(last, range.to)) },
    joinTolerance: v.joinTolerance,
    joins: ratingProblems(v.segments, v.joinTolerance).joins.map((j) => ({ ...j, flowBelow: round(j.flowBelow), flowAbove: round(j.flowAbove), relativeJump: round(j.relativeJump, 6) })),
    note: v.note,
    createdAt: v.createdAt,
  };
}

const round = (x: number, digits = 4) => Math.round(x * 10 ** digits) / 10 ** digits;
const named = (v: RatingCurveVersion): NamedCurve => ({ name: `valid from ${isoUtc(v.validFromMs)}`, segments: v.segments });

/**
 * Refuses thresholds the gauge's curves cannot carry (422 naming each threshold): a level needs a
 * curve and must lie inside every version's stage range; the flows must rise under every version.
 */
export async function checkThresholds(db: Queryable, gaugeId: string, thresholds: readonly GivenThreshold[], path = 'body.thresholds'): Promise<void> {
  const versions = await listRatingCurves(db, gaugeId);
  const problems = thresholdProblems(thresholds, versions.map(named));
  if (problems.length) {
    throw invalid(
      problems.map((p) => ({
        path: `${path}[${p.index}].${p.field}`,
        message: versions.length || p.field === 'value' ? p.message : `${p.message} (POST /gauges/${gaugeId}/rating-curves)`,
      })),
    );
  }
}

export interface RatingCurveInput {
  validFrom: string;
  segments: RatingSegment[];
  joinTolerance: number;
  note?: string;
}

/**
 * Adds a version. Its segments are checked all at once; the gauge's level thresholds must lie in
 * its range. The same valid-from again: the same curve answers as stored (created false), another
 * one is refused, since replacing a version would lose the one stored.
 */
export async function addRatingCurve(db: Queryable, gaugeId: string, body: RatingCurveInput): Promise<{ created: boolean; curve: RatingCurveView }> {
  const gauge = await getGauge(db, gaugeId, true);
  if (!gauge) throw notFound(`no gauge ${gaugeId}`);
  const validFromMs = rfc3339Ms(body.validFrom);
  const errors: FieldError[] = ratingProblems(body.segments, body.joinTolerance).problems.map((p) => ({
    path: ['body.segments', ...p.path].map((x, i) => (i === 0 ? x : typeof x === 'number' ? `[${x}]` : `.${x}`)).join(''),
    message: p.message,
  }));
  if (errors.length) throw invalid(errors);
  const versions = await listRatingCurves(db, gaugeId);
  const same = versions.find((v) => v.validFromMs === validFromMs);
  if (same) {
    if (JSON.stringify(same.segments) === JSON.stringify(body.segments) && same.joinTolerance === body.joinTolerance && same.note === (body.note ?? null)) {
      return { created: false, curve: ratingCurveView(same) };
    }
    throw conflict(`gauge ${gaugeId} has another rating curve valid from ${isoUtc(validFromMs)}; delete it first (DELETE /gauges/${gaugeId}/rating-curves/${isoUtc(validFromMs)}) or give another validFrom`, [
      { path: 'body.validFrom', message: 'a different curve is stored for this time' },
    ]);
  }
  const given = gauge.thresholds.map(asGiven);
  const problems = thresholdProblems(given, [{ name: `valid from ${isoUtc(validFromMs)}`, segments: body.segments }]);
  if (problems.length) {
    throw invalid(problems.map((p) => ({ path: 'body.segments', message: p.message })), `the gauge's thresholds do not fit this curve (change them with PATCH /gauges/${gaugeId}); nothing was written`);
  }
  const stored = await insertRatingCurve(db, { gaugeId, validFromMs, segments: body.segments, joinTolerance: body.joinTolerance, note: body.note ?? null });
  return { created: true, curve: ratingCurveView(stored) };
}

/** Removes a version; the last one stays while the gauge has thresholds given as water levels. */
export async function removeRatingCurve(db: Queryable, gaugeId: string, validFrom: string): Promise<void> {
  const gauge = await getGauge(db, gaugeId, true);
  if (!gauge) throw notFound(`no gauge ${gaugeId}`);
  const validFromMs = parseRfc3339(validFrom) ?? NaN;
  const versions = await listRatingCurves(db, gaugeId);
  if (!versions.some((v) => v.validFromMs === validFromMs)) throw notFound(`gauge ${gaugeId} has no rating curve valid from ${validFrom}`);
  const levels = gauge.thresholds.filter((t) => t.given === 'level');
  if (versions.length === 1 && levels.length) {
    throw conflict(`the thresholds ${levels.map((t) => `"${t.label}"`).join(', ')} are water levels and need a rating curve; give them as flows (PATCH /gauges/${gaugeId}) before deleting the last curve`);
  }
  await deleteRatingCurve(db, gaugeId, validFromMs);
}

/** What a run converts with: the thresholds under the version in force at its issue time, and that version. */
export interface RatingAtIssue {
  thresholds: ThresholdInBothUnits[];
  curve: { validFrom: string; beforeFirst: boolean; segments: RatingSegment[] } | null;
}

export async function ratingAtIssue(db: Queryable, gauge: Gauge, issueMs: number): Promise<RatingAtIssue> {
  const versions = await listRatingCurves(db, gauge.id);
  const found = curveAt(versions, issueMs);
  if (!found) return { thresholds: gauge.thresholds, curve: null };
  return {
    thresholds: thresholdsInBothUnits(gauge.thresholds.map(asGiven), found.version.segments),
    curve: { validFrom: isoUtc(found.version.validFromMs), beforeFirst: found.beforeFirst, segments: found.version.segments },
  };
}

function asGiven(t: ThresholdInBothUnits): GivenThreshold {
  return t.given === 'level' ? { label: t.label, level: t.level! } : { label: t.label, value: t.flow };
}
