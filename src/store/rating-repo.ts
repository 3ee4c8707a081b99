import type { RatingSegment } from '../core/rating/rating-curve.ts';
import type { Queryable } from './db.ts';
import { RatingSegmentsColumn } from './json-columns.ts';

/** One version of a gauge's rating curve. */
export interface RatingCurveVersion {
  gaugeId: string;
  validFromMs: number;
  segments: RatingSegment[];
  joinTolerance: number;
  note: string | null;
  createdAt: string;
}

interface RatingRow {
  gauge_id: string;
  valid_from: Date;
  segments: unknown;
  join_tolerance: number;
  note: string | null;
  created_at: Date;
}

function fromRow(r: RatingRow): RatingCurveVersion {
  return {
    gaugeId: r.gauge_id,
    validFromMs: r.valid_from.getTime(),
    segments: RatingSegmentsColumn.parse(r.segments),
    joinTolerance: Number(r.join_tolerance),
    note: r.note,
    createdAt: r.created_at.toISOString(),
  };
}

/** A gauge's versions in ascending valid-from time. */
export async function listRatingCurves(db: Queryable, gaugeId: string): Promise<RatingCurveVersion[]> {
  const { rows } = await db.query<RatingRow>('select * from rating_curves where gauge_id = $1 order by valid_from', [gaugeId]);
  return rows.map(fromRow);
}

/** Every gauge's versions, by gauge, each list ascending. */
export async function listAllRatingCurves(db: Queryable): Promise<Map<string, RatingCurveVersion[]>> {
  const { rows } = await db.query<RatingRow>('select * from rating_curves order by gauge_id, valid_from');
  const byGauge = new Map<string, RatingCurveVersion[]>();
  for (const r of rows) {
    const list = byGauge.get(r.gauge_id) ?? [];
    list.push(fromRow(r));
    byGauge.set(r.gauge_id, list);
  }
  return byGauge;
}

export async function insertRatingCurve(db: Queryable, v: Omit<RatingCurveVersion, 'createdAt'>): Promise<RatingCurveVersion> {
  const { rows } = await db.query<RatingRow>(
    'insert into rating_curves (gauge_id, valid_from, segments, join_tolerance, note) values ($1, $2, $3::jsonb, $4, $5) returning *',
    [v.gaugeId, new Date(v.validFromMs), JSON.stringify(v.segments), v.joinTolerance, v.note],
  );
  return fromRow(rows[0]);
}

export async function deleteRatingCurve(db: Queryable, gaugeId: string, validFromMs: number): Promise<boolean> {
  const { rows } = await db.query('delete from rating_curves where gauge_id = $1 and valid_from = $2 returning gauge_id', [gaugeId, new Date(validFromMs)]);
  return rows.length > 0;
}
