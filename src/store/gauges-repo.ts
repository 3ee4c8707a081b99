import { curveAt } from '../core/rating/curve-at.ts';
import { stageRange } from '../core/rating/rating-curve.ts';
import { thresholdsInBothUnits, type GivenThreshold, type ThresholdInBothUnits } from '../core/rating/threshold-units.ts';
import type { Queryable } from './db.ts';
import { Thresholds } from './json-columns.ts';
import { listAllRatingCurves, listRatingCurves, type RatingCurveVersion } from './rating-repo.ts';

export interface Gauge {
  id: string;
  name: string;
  catchmentAreaKm2: number;
  timeStep: string;
  stepSeconds: number;
  timeZone: string;
  flowUnit: string;
  location: { latitude: number; longitude: number; elevationM?: number } | null;
  /**
   * Flood thresholds in flow and, where the gauge has a rating curve, in water level, through the
   * curve version in force now (a run converts with the version in force at its issue time).
   */
  thresholds: ThresholdInBothUnits[];
  /** The rating curve version in force now, or null without one. */
  ratingCurve: { validFrom: string; stageRange: { from: number; to: number }; versions: number } | null;
  /** Issue-time updating uses the latest observation at most this many steps before issue time. */
  updatingMaxAgeSteps: number;
  /** Flow cap in m³/s set on the gauge; null = derived from the archive (src/services/plausible-values.ts). */
  maxFlow: number | null;
  /** Precipitation cap in mm per step; null = the default. */
  maxPrecipitation: number | null;
  /** Plausible air temperature in °C; null = the default range. */
  airTemperatureRange: { min: number; max: number } | null;
  /** The largest flow the archive holds (observed or simulated); kept by ingest, never sent out as is. */
  archiveMaxFlow: number | null;
  createdAt: string;
  updatedAt: string;
}

interface GaugeRow {
  id: string;
  name: string;
  catchment_area_km2: number;
  time_step: string;
  step_seconds: number;
  time_zone: string;
  flow_unit: string;
  latitude: number | null;
  longitude: number | null;
  elevation_m: number | null;
  thresholds: unknown;
  updating_max_age_steps: number;
  max_flow: number | null;
  max_precipitation: number | null;
  min_air_temperature: number | null;
  max_air_temperature: number | null;
  archive_max_flow: number | null;
  created_at: Date;
  updated_at: Date;
}

function fromRow(r: GaugeRow, curves: RatingCurveVersion[]): Gauge {
  const inForce = curveAt(curves, Date.now());
  return {
    id: r.id,
    name: r.name,
    catchmentAreaKm2: r.catchment_area_km2,
    timeStep: r.time_step,
    stepSeconds: r.step_seconds,
    timeZone: r.time_zone,
    flowUnit: r.flow_unit,
    location:
      r.latitude === null || r.longitude === null
        ? null
        : { latitude: r.latitude, longitude: r.longitude, ...(r.elevation_m === null ? {} : { elevationM: r.elevation_m }) },
    thresholds: thresholdsInBothUnits(Thresholds.parse(r.thresholds), inForce?.version.segments ?? null),
    ratingCurve: inForce
      ? { validFrom: new Date(inForce.version.validFromMs).toISOString().replace('.000Z', 'Z'), stageRange: stageRange(inForce.version.segments), versions: curves.length }
      : null,
    updatingMaxAgeSteps: r.updating_max_age_steps ?? 2,
    maxFlow: r.max_flow ?? null,
    maxPrecipitation: r.max_precipitation ?? null,
    airTemperatureRange: r.min_air_temperature === null || r.min_air_temperature === undefined || r.max_air_temperature === null ? null : { min: r.min_air_temperature, max: r.max_air_temperature },
    archiveMaxFlow: r.archive_max_flow ?? null,
    createdAt: r.created_at.toISOString(),
    updatedAt: r.updated_at.toISOString(),
  };
}

export type GaugeInput = Omit<Gauge, 'createdAt' | 'updatedAt' | 'updatingMaxAgeSteps' | 'thresholds' | 'ratingCurve' | 'maxFlow' | 'maxPrecipitation' | 'airTemperatureRange' | 'archiveMaxFlow'> & {
  updatingMaxAgeSteps?: number;
  thresholds: (GivenThreshold | ThresholdInBothUnits)[];
  maxFlow?: number | null;
  maxPrecipitation?: number | null;
  airTemperatureRange?: { min: number; max: number } | null;
};

/** What is stored of a threshold: the unit it was given in, never the converted number. */
function asGiven(t: GivenThreshold | ThresholdInBothUnits): GivenThreshold {
  if ('given' in t) return t.given === 'level' ? { label: t.label, level: t.level! } : { label: t.label, value: t.flow };
  return t.level !== undefined ? { label: t.label, level: t.level } : { label: t.label, value: t.value! };
}

export async function insertGauge(db: Queryable, g: GaugeInput): Promise<Gauge> {
  const { rows } = await db.query<GaugeRow>(
    `insert into gauges (id, name, catchment_area_km2, time_step, step_seconds, time_zone, flow_unit,
                         latitude, longitude, elevation_m, thresholds, updating_max_age_steps,
                         max_flow, max_precipitation, min_air_temperature, max_air_temperature)
     values ($1,$2,$3,$4,$5,$6,$7,$8,$9,$10,$11::jsonb,$12,$13,$14,$15,$16) returning *`,
    params(g),
  );
  return fromRow(rows[0], await listRatingCurves(db, g.id));
}

export async function updateGauge(db: Queryable, g: GaugeInput): Promise<Gauge> {
  const { rows } = await db.query<GaugeRow>(
    `update gauges set name=$2, catchment_area_km2=$3, time_step=$4, step_seconds=$5, time_zone=$6, flow_unit=$7,
            latitude=$8, longitude=$9, elevation_m=$10, thresholds=$11::jsonb, updating_max_age_steps=$12,
            max_flow=$13, max_precipitation=$14, min_air_temperature=$15, max_air_temperature=$16, updated_at=now()
     where id=$1 returning *`,
    params(g),
  );
  return fromRow(rows[0], await listRatingCurves(db, g.id));
}

function params(g: GaugeInput): unknown[] {
  return [
    g.id,
    g.name,
    g.catchmentAreaKm2,
    g.timeStep,
    g.stepSeconds,
    g.timeZone,
    g.flowUnit,
    g.location?.latitude ?? null,
    g.location?.longitude ?? null,
    g.location?.elevationM ?? null,
    JSON.stringify(g.thresholds.map(asGiven)),
    g.updatingMaxAgeSteps ?? 2,
    g.maxFlow ?? null,
    g.maxPrecipitation ?? null,
    g.airTemperatureRange?.min ?? null,
    g.airTemperatureRange?.max ?? null,
  ];
}

export async function getGauge(db: Queryable, id: string, forUpdate = false): Promise<Gauge | null> {
  const { rows } = await db.query<GaugeRow>(`select * from gauges where id = $1${forUpdate ? ' for update' : ''}`, [id]);
  return rows[0] ? fromRow(rows[0], await listRatingCurves(db, id)) : null;
}

export async function listGauges(db: Queryable): Promise<Gauge[]> {
  const curves = await listAllRatingCurves(db);
  return (await db.query<GaugeRow>('select * from gauges order by id')).rows.map((r) => fromRow(r, curves.get(r.id) ?? []));
}

/** Up to `limit` gauges after `afterId` in id order (one page of GET /gauges). */
export async function listGaugesAfter(db: Queryable, afterId: string | null, limit: number): Promise<Gauge[]> {
  const { rows } = await db.query<GaugeRow>('select * from gauges where $1::text is null or id > $1 order by id limit $2', [afterId, limit]);
  const curves = await listAllRatingCurves(db);
  return rows.map((r) => fromRow(r, curves.get(r.id) ?? []));
}

/** How much archive a gauge holds, per kind; step changes look at it. */
export async function archiveCounts(db: Queryable, id: string): Promise<Record<string, number>> {
  const { rows } = await db.query<Record<string, number>>(
    `select (select count(*) from observed_flow where gauge_id = $1)::int as observations,
            (select count(*) from forcing_values where gauge_id = $1)::int as forcings,
            (select count(*) from member_simulations where gauge_id = $1)::int as simulations,
            (select count(*) from reforecasts where gauge_id = $1)::int as reforecasts`,
    [id],
  );
  return Object.fromEntries(Object.entries(rows[0]).map(([k, v]) => [k, Number(v)]));
}

/** Everything a delete would take with the gauge: its archive, model versions and stored forecasts. */
export async function dataCounts(db: Queryable, id: string): Promise<Record<string, number>> {
  const { rows } = await db.query<Record<string, number>>(
    `select (select count(*) from model_versions where gauge_id = $1)::int as "modelVersions",
            (select count(*) from forecast_runs where gauge_id = $1)::int as forecasts`,
    [id],
  );
  return { ...(await archiveCounts(db, id)), ...Object.fromEntries(Object.entries(rows[0]).map(([k, v]) => [k, Number(v)])) };
}

export async function deleteGauge(db: Queryable, id: string): Promise<void> {
  await db.query('delete from gauges where id = $1', [id]);
}

/** Raises the gauge's archived flow maximum to a batch's largest value (never lowers it: a cap stays generous). */
export async function raiseArchiveMaxFlow(db: Queryable, id: string, values: Float64Array): Promise<void> {
  let max = -Infinity;
  for (const v of values) if (v > max) max = v;
  if (!Number.isFinite(max)) return;
  await db.query('update gauges set archive_max_flow = greatest(coalesce(archive_max_flow, 0), $2) where id = $1', [id, max]);
}
