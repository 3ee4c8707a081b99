import type { Queryable } from './db.ts';

export type JobStatus = 'queued' | 'running' | 'succeeded' | 'failed' | 'cancelled';

export interface Job {
  id: string;
  kind: string;
  gaugeId: string | null;
  params: unknown;
  status: JobStatus;
  stage: string;
  percent: number;
  cancelRequested: boolean;
  result: unknown;
  error: string | null;
  createdBy: string | null;
  claimedBy: string | null;
  heartbeatAt: string | null;
  createdAt: string;
  startedAt: string | null;
  finishedAt: string | null;
}

interface Row {
  id: string | number;
  kind: string;
  gauge_id: string | null;
  params: unknown;
  status: JobStatus;
  stage: string;
  percent: number;
  cancel_requested: boolean;
  result: unknown;
  error: string | null;
  created_by: string | null;
  claimed_by: string | null;
  heartbeat_at: Date | null;
  created_at: Date;
  started_at: Date | null;
  finished_at: Date | null;
}

const fromRow = (r: Row): Job => ({
  id: String(r.id),
  kind: r.kind,
  gaugeId: r.gauge_id,
  params: r.params,
  status: r.status,
  stage: r.stage,
  percent: Number(r.percent),
  cancelRequested: r.cancel_requested,
  result: r.result,
  error: r.error,
  createdBy: r.created_by,
  claimedBy: r.claimed_by,
  heartbeatAt: r.heartbeat_at?.toISOString() ?? null,
  createdAt: r.created_at.toISOString(),
  startedAt: r.started_at?.toISOString() ?? null,
  finishedAt: r.finished_at?.toISOString() ?? null,
});

export async function enqueueJob(db: Queryable, kind: string, gaugeId: string | null, params: unknown, createdBy: string | null): Promise<Job> {
  const { rows } = await db.query<Row>(
    'insert into jobs (kind, gauge_id, params, created_by) values ($1, $2, $3::jsonb, $4) returning *',
    [kind, gaugeId, JSON.stringify(params), createdBy],
  );
  return fromRow(rows[0]);
}

/** Takes the oldest queued job; SKIP LOCKED lets several instances share the queue. */
export async function claimJob(db: Queryable, instance: string): Promise<Job | null> {
  const { rows } = await db.query<Row>(
    `update jobs set status = 'running', stage = 'starting', claimed_by = $1, heartbeat_at = now(), started_at = now()
     where id = (select id from jobs where status = 'queued' order by created_at, id for update skip locked limit 1)
     returning *`,
    [instance],
  );
  return rows[0] ? fromRow(rows[0]) : null;
}

/**
 * Records progress and the heartbeat of a job this instance holds. Answers 'cancel' when
 * cancellation was asked for, 'lost' when the job is no longer running under this instance (another
 * instance marked it failed after its heartbeat went stale), else 'go'.
 */
export async function reportProgress(db: Queryable, id: string, stage: string, percent: number, instance: string): Promise<'go' | 'cancel' | 'lost'> {
  const { rows } = await db.query<{ cancel_requested: boolean }>(
    `update jobs set stage = $2, percent = $3, heartbeat_at = now() where id = $1 and status = 'running' and claimed_by = $4 returning cancel_requested`,
    [id, stage, Math.max(0, Math.min(100, percent)), instance],
  );
  if (!rows[0]) return 'lost';
  return rows[0].cancel_requested ? 'cancel' : 'go';
}

/** Thrown where a job's results would be stored by an instance that no longer holds the job. */
export class JobLostError extends Error {
  constructor(id: string) {
    super(`job ${id} is no longer held by this instance (another instance marked it ended); its results were not stored`);
    this.name = 'JobLostError';
  }
}

/**
 * Inside the transaction that stores a job's results: locks the job's row and checks this instance
 * still runs it, beating its heartbeat, so no other instance can mark it failed until the results
 * and the job's end are written. Throws JobLostError otherwise, and the transaction rolls back.
 */
export async function holdJob(tx: Queryable, id: string, instance: string): Promise<void> {
  const { rows } = await tx.query(`update jobs set heartbeat_at = now() where id = $1 and status = 'running' and claimed_by = $2 returning id`, [id, instance]);
  if (!rows[0]) throw new JobLostError(id);
}

/** Ends a job this instance holds; answers false (and writes nothing) when it no longer holds it. */
export async function finishJob(db: Queryable, id: string, status: 'succeeded' | 'failed' | 'cancelled', result: unknown, error: string | null, instance: string): Promise<boolean> {
  const { rows } = await db.query(
    `update jobs set status = $2, result = $3::jsonb, error = $4, finished_at = now(), heartbeat_at = now(),
       percent = case when $2 = 'succeeded' then 100 else percent end, stage = $2
     where id = $1 and status = 'running' and claimed_by = $5 returning id`,
    [id, status, result === null ? null : JSON.stringify(result), error, instance],
  );
  return rows.length > 0;
}

/** Asks a queued or running job to stop; a job that already ended is left as it is (answers null). */
export async function requestCancel(db: Queryable, id: string): Promise<Job | null> {
  // Job ids are numbers: anything else names no job (and must not reach the bigint cast as an error).
  if (!/^\d{1,18}$/.test(id)) return null;
  const { rows } = await db.query<Row>(
    `update jobs set cancel_requested = true,
       status = case when status = 'queued' then 'cancelled' else status end,
       finished_at = case when status = 'queued' then now() else finished_at end
     where id = $1 and status in ('queued', 'running') returning *`,
    [id],
  );
  return rows[0] ? fromRow(rows[0]) : null;
}

export async function getJob(db: Queryable, id: string): Promise<Job | null> {
  if (!/^\d{1,18}$/.test(id)) return null;
  const { rows } = await db.query<Row>('select * from jobs where id = $1', [id]);
  return rows[0] ? fromRow(rows[0]) : null;
}

/** Newest first: up to `limit` jobs with ids below `beforeId` (all when null), of one gauge or of all. */
export async function listJobs(db: Queryable, gaugeId: string | null, beforeId: string | null, limit = 50): Promise<Job[]> {
  const { rows } = await db.query<Row>(
    'select * from jobs where ($1::text is null or gauge_id = $1) and ($2::bigint is null or id < $2::bigint) order by id desc limit $3',
    [gaugeId, beforeId, limit],
  );
  return rows.map(fromRow);
}

/**
 * Running jobs whose heartbeat stopped (their instance died or restarted) are marked failed, so
 * nothing is lost silently. A live instance beats every few seconds, far inside staleSeconds.
 */
export async function failStaleJobs(db: Queryable, staleSeconds: number): Promise<string[]> {
  const { rows } = await db.query<{ id: string }>(
    `update jobs set status = 'failed', stage = 'failed', finished_at = now(),
       error = 'interrupted: the service instance running it stopped (no heartbeat for ' || $1 || ' s)'
     where status = 'running' and heartbeat_at < now() - make_interval(secs => $1::int) returning id::text as id`,
    [staleSeconds],
  );
  return rows.map((r) => r.id);
}
