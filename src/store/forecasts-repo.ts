import type { Queryable } from './db.ts';
import { RunSummary } from './json-columns.ts';
import { issueTimeWindow } from './issue-time-window.ts';

export interface StoredRun {
  id: string;
  gaugeId: string;
  issueTime: string;
  source: string;
  requestHash: string;
  idempotencyKey: string | null;
  status: 'corrected' | 'degraded';
  etag: string;
  output: string;
  createdAt: string;
}

interface Row {
  id: string;
  gauge_id: string;
  issue_time: Date;
  source: string;
  request_hash: string;
  idempotency_key: string | null;
  status: 'corrected' | 'degraded';
  etag: string;
  output: string;
  created_at: Date;
}

const fromRow = (r: Row): StoredRun => ({
  id: r.id,
  gaugeId: r.gauge_id,
  issueTime: r.issue_time.toISOString(),
  source: r.source,
  requestHash: r.request_hash,
  idempotencyKey: r.idempotency_key,
  status: r.status,
  etag: r.etag,
  output: r.output,
  createdAt: r.created_at.toISOString(),
});

const COLUMNS = 'id, gauge_id, issue_time, source, request_hash, idempotency_key, status, etag, output, created_at';

export interface NewRun {
  id: string;
  gaugeId: string;
  issueTimeMs: number;
  source: string;
  requestHash: string;
  idempotencyKey: string | null;
  status: 'corrected' | 'degraded';
  modelVersionId: string | null;
  seed: number;
  input: unknown;
  /** The input already as JSON text (then `input` is not read). */
  inputJson?: string;
  output: string;
  etag: string;
  summary: unknown;
  /** Per lead time, the 100 midpoint-level quantiles. */
  percentiles: number[][];
  /** The observation the run was updated on (or the run's own issue-time observation). */
  issueObservation?: { timeMs: number; value: number; source: 'run' | 'archive' } | null;
}

export const PERCENTILE_LEVELS = 100;

/** Quantiles per lead as float32 bytes, lead-major: compact and cheap to store. */
export function encodePercentiles(perLead: number[][]): Uint8Array {
  const out = new Float32Array(perLead.length * PERCENTILE_LEVELS);
  perLead.forEach((row, k) => out.set(row, k * PERCENTILE_LEVELS));
  return new Uint8Array(out.buffer);
}

export function decodePercentiles(bytes: Uint8Array): number[][] {
  const copy = new Uint8Array(bytes); // aligned for the float view
  const values = new Float32Array(copy.buffer, 0, copy.byteLength / 4);
  const out: number[][] = [];
  for (let k = 0; k < values.length; k += PERCENTILE_LEVELS) out.push(Array.from(values.subarray(k, k + PERCENTILE_LEVELS)));
  return out;
}

/** The lock that makes run event numbers follow commit order (held to the end of the inserting transaction). */
const RUN_EVENT_LOCK = 7305015;

/**
 * Stores a run and announces it, in one statement (one round trip; atomic on its own, and the
 * NOTIFY is delivered when it commits). The run's event number is drawn only after a transaction
 * lock is taken, so it is never below that of a run committed before it: a client resuming after
 * event n misses no run (the lock is held only to the end of this insert's transaction).
 */
export async function insertRun(db: Queryable, r: NewRun): Promise<void> {
  await db.query(
    `with stored as (
       insert into forecast_runs (id, gauge_id, issue_time, source, request_hash, idempotency_key, status, model_version_id, seed,
                                  input, output, etag, summary, percentiles, issue_observation_time, issue_observation_value, issue_observation_source,
                                  event_seq)
       values ($1, $2, to_timestamp($3), $4, $5, $6, $7, $8, $9, $10, $11, $12, $13::jsonb, $14, to_timestamp($15), $16, $17,
               (select nextval(pg_get_serial_sequence('forecast_runs', 'event_seq')) from (select pg_advisory_xact_lock($19)) as locked))
       returning id, gauge_id, event_seq)
     select pg_notify('forecast_runs', json_build_object('eventId', event_seq::text, 'gaugeId', gauge_id, 'runId', id, 'issueTime', $18::text)::text) from stored`,
    [r.id, r.gaugeId, r.issueTimeMs / 1000, r.source, r.requestHash, r.idempotencyKey, r.status, r.modelVersionId, r.seed,
      r.inputJson ?? JSON.stringify(r.input), r.output, r.etag, JSON.stringify(r.summary), Buffer.from(encodePercentiles(r.percentiles)),
      r.issueObservation ? r.issueObservation.timeMs / 1000 : null, r.issueObservation?.value ?? null, r.issueObservation?.source ?? null,
      new Date(r.issueTimeMs).toISOString().replace('.000Z', 'Z'), RUN_EVENT_LOCK],
  );
}

/** A stored run as a server-sent event: its event number (decimal text) and what it announces. */
export interface RunEvent {
  eventId: string;
  gaugeId: string;
  runId: string;
  issueTime: string;
}

/**
 * Runs stored after event number `after`, oldest first, at most `limit`; `more` says whether
 * further ones exist, and `latest` is the newest event number stored (null when none).
 */
export async function runEventsAfter(db: Queryable, after: bigint, limit: number): Promise<{ events: RunEvent[]; more: boolean; latest: string | null }> {
  const { rows } = await db.query<{ event_seq: string | number; gauge_id: string; id: string; issue_time: Date }>(
    'select event_seq::text as event_seq, gauge_id, id, issue_time from forecast_runs where event_seq > $1 order by event_seq limit $2',
    [after.toString(), limit + 1],
  );
  return {
    events: rows.slice(0, limit).map((r) => ({ eventId: String(r.event_seq), gaugeId: r.gauge_id, runId: r.id, issueTime: r.issue_time.toISOString().replace('.000Z', 'Z') })),
    more: rows.length > limit,
    latest: await latestRunEventId(db),
  };
}

/** The newest event number stored, or null when no run is stored. */
export async function latestRunEventId(db: Queryable): Promise<string | null> {
  const { rows } = await db.query<{ latest: string | null }>('select max(event_seq)::text as latest from forecast_runs');
  return rows[0]?.latest ?? null;
}

export async function findRunByKey(db: Queryable, gaugeId: string, issueTimeMs: number, source: string): Promise<StoredRun | null> {
  const { rows } = await db.query<Row>(`select ${COLUMNS} from forecast_runs where gauge_id = $1 and issue_time = to_timestamp($2) and source = $3`, [gaugeId, issueTimeMs / 1000, source]);
  return rows[0] ? fromRow(rows[0]) : null;
}

/** Keys are scoped by gauge: the same key on another gauge is another request. */
export async function findRunByIdempotencyKey(db: Queryable, gaugeId: string, key: string): Promise<StoredRun | null> {
  const { rows } = await db.query<Row>(`select ${COLUMNS} from forecast_runs where gauge_id = $1 and idempotency_key = $2`, [gaugeId, key]);
  return rows[0] ? fromRow(rows[0]) : null;
}

export async function getRun(db: Queryable, id: string): Promise<StoredRun | null> {
  const { rows } = await db.query<Row>(`select ${COLUMNS} from forecast_runs where id = $1`, [id]);
  return rows[0] ? fromRow(rows[0]) : null;
}

/** The newest run by issue time (then by storage time). */
export async function latestRunTag(db: Queryable, gaugeId: string): Promise<{ id: string; etag: string } | null> {
  const { rows } = await db.query<{ id: string; etag: string }>(
    'select id, etag from forecast_runs where gauge_id = $1 order by issue_time desc, created_at desc limit 1',
    [gaugeId],
  );
  return rows[0] ?? null;
}

export async function listRuns(db: Queryable, gaugeId: string, fromMs?: number, toMs?: number, limit = 500) {
  const params: unknown[] = [gaugeId];
  const where = issueTimeWindow(params, fromMs, toMs);
  params.push(limit);
  const { rows } = await db.query<{ id: string; issue_time: Date; source: string; status: string; model_version_id: string | null; summary: unknown; created_at: Date }>(
    `select id, issue_time, source, status, model_version_id::text as model_version_id, summary, created_at from forecast_runs
     where gauge_id = $1${where} order by issue_time desc, created_at desc limit $${params.length}`,
    params,
  );
  return rows.map((r) => ({
    id: r.id,
    issueTime: r.issue_time.toISOString().replace('.000Z', 'Z'),
    source: r.source,
    status: r.status,
    modelVersionId: r.model_version_id,
    thresholds: RunSummary.parse(r.summary),
    createdAt: r.created_at.toISOString(),
    href: `/forecasts/${r.id}`,
  }));
}

/** Each gauge with its newest run's summary, for the overview. */
export async function latestSummaries(db: Queryable) {
  const { rows } = await db.query<{ gauge_id: string; id: string | null; issue_time: Date | null; status: string | null; summary: unknown }>(
    `select g.id as gauge_id, r.id, r.issue_time, r.status, r.summary
       from gauges g
       left join lateral (select id, issue_time, status, summary from forecast_runs f where f.gauge_id = g.id
                          order by issue_time desc, created_at desc limit 1) r on true
      order by g.id`,
  );
  return rows.map((r) => ({ ...r, summary: r.summary === null ? null : RunSummary.parse(r.summary) }));
}

/** A stored run's answer and its stored midpoint-level quantiles per lead time (null when not stored). */
export async function getRunWithPercentiles(db: Queryable, id: string): Promise<{ output: string; etag: string; percentiles: number[][] | null } | null> {
  const { rows } = await db.query<{ output: string; etag: string; percentiles: Uint8Array | null }>('select output, etag, percentiles from forecast_runs where id = $1', [id]);
  const r = rows[0];
  if (!r) return null;
  return { output: r.output, etag: r.etag, percentiles: r.percentiles && r.percentiles.byteLength ? decodePercentiles(r.percentiles) : null };
}
