import type { z } from 'zod';
import type { Queryable } from './db.ts';
import { chooseArchive } from '../core/stochastic/archive-choice.ts';
import { decodePercentiles } from './forecasts-repo.ts';
import { ArchiveSummary, RunEnsembles, RunIssuedThresholds, RunValidTimes } from './json-columns.ts';

/** What verification reads of one stored run (see src/services/forecast-view.ts for the served shape). */
export interface RunForVerification {
  id: string;
  issueMs: number;
  source: string;
  status: 'corrected' | 'degraded';
  modelVersionId: string | null;
  /** Valid time of each lead (RFC 3339). */
  validTimes: string[];
  raw: { id: string; values: number[] }[];
  /** null for degraded runs. */
  corrected: { id: string; values: number[] }[] | null;
  /** Per lead, the stochastic stage's quantiles at the midpoint levels (i − 0.5)/K. */
  percentiles: number[][];
  /** Whether the run was served with issue-time updating (its answer's updating.status was 'on'). */
  updated: boolean;
  /** The thresholds' probabilities as issued (per lead and at any time); null when the output has none. */
  issued: { label: string; value: number; exceedance: number[]; anyTime: number }[] | null;
}

export interface RunPage {
  gaugeId: string;
  fromMs?: number;
  toMs?: number;
  source?: string;
  /** Only these runs. */
  ids?: string[];
  /** Keyset: runs after this (issue time, id). */
  after?: { issueMs: number; id: string };
  limit: number;
}

/**
 * The conditions of one page of a gauge's stored runs after `where gauge_id = $1`, and their
 * parameters; the page's limit is the last parameter. `t` prefixes the run table's columns ('r.').
 */
function runPageWhere(p: RunPage, t: string): { params: unknown[]; where: string } {
  const params: unknown[] = [p.gaugeId];
  let where = '';
  const add = (sql: string, v: unknown) => {
    params.push(v);
    where += ` and ${t}${sql.replace('?', `$${params.length}`)}`;
  };
  if (p.fromMs !== undefined) add('issue_time >= to_timestamp(?)', p.fromMs / 1000);
  if (p.toMs !== undefined) add('issue_time < to_timestamp(?)', p.toMs / 1000);
  if (p.source !== undefined) add('source = ?', p.source);
  if (p.ids !== undefined) add('id = any(?::text[])', p.ids);
  if (p.after) {
    params.push(p.after.issueMs / 1000, p.after.id);
    where += ` and (${t}issue_time, ${t}id) > (to_timestamp($${params.length - 1}), $${params.length})`;
  }
  params.push(p.limit);
  return { params, where };
}

/** Stored runs in issue-time order (then id), one page at a time so long windows stream. */
export async function readRunsForVerification(db: Queryable, p: RunPage): Promise<RunForVerification[]> {
  const { params, where } = runPageWhere(p, '');
  const { rows } = await db.query<{
    id: string;
    t: number;
    source: string;
    status: 'corrected' | 'degraded';
    model_version_id: string | null;
    valid_times: unknown;
    ensemble: unknown;
    thresholds: unknown;
    percentiles: Uint8Array;
    updating: string | null;
  }>(
    // The output text is parsed once per row (the limited subquery is not flattened into the outer one).
    `select id, t, source, status, model_version_id, o->'validTimes' as valid_times, o->'ensemble' as ensemble, o->'thresholds' as thresholds, percentiles,
            o->'updating'->>'status' as updating
       from (select id, issue_time, (extract(epoch from issue_time) * 1000)::float8 as t, source, status,
                    model_version_id::text as model_version_id, output::jsonb as o, percentiles
               from forecast_runs where gauge_id = $1${where}
              order by issue_time, id limit $${params.length}) r
      order by issue_time, id`,
    params,
  );
  return rows.map((r) => {
    const ensemble = RunEnsembles.parse(r.ensemble);
    return {
      id: r.id,
      issueMs: Number(r.t),
      source: r.source,
      status: r.status,
      modelVersionId: r.model_version_id,
      validTimes: RunValidTimes.parse(r.valid_times),
      raw: ensemble.raw,
      corrected: ensemble.corrected,
      percentiles: decodePercentiles(r.percentiles),
      updated: r.updating === 'on',
      issued: r.thresholds === null || r.thresholds === undefined ? null : RunIssuedThresholds.parse(r.thresholds),
    };
  });
}

/** The newest corrected runs of one model version issued at or after a time (newest first). */
export async function readRecentRunPercentiles(db: Queryable, gaugeId: string, versionId: string, fromMs: number, limit: number) {
  const { rows } = await db.query<{ t: number; percentiles: Uint8Array }>(
    `select (extract(epoch from issue_time) * 1000)::float8 as t, percentiles from forecast_runs
      where gauge_id = $1 and status = 'corrected' and model_version_id = $2 and issue_time >= to_timestamp($3)
      order by issue_time desc, created_at desc limit $4`,
    [gaugeId, versionId, fromMs / 1000, limit],
  );
  return rows.map((r) => ({ issueMs: Number(r.t), percentiles: decodePercentiles(r.percentiles) }));
}

/** Time of the newest non-missing observation (epoch ms), or null. */
export async function latestObservationMs(db: Queryable, gaugeId: string): Promise<number | null> {
  const { rows } = await db.query<{ t: number | null }>(
    `select (extract(epoch from max(time)) * 1000)::float8 as t from observed_flow where gauge_id = $1 and value is not null`,
    [gaugeId],
  );
  return rows[0]?.t === null || rows[0]?.t === undefined ? null : Number(rows[0].t);
}

/** Whether the gauge has any stored run (the overview's 'no-forecast'). */
export async function hasRuns(db: Queryable, gaugeId: string): Promise<boolean> {
  const { rows } = await db.query('select 1 from forecast_runs where gauge_id = $1 limit 1', [gaugeId]);
  return rows.length > 0;
}

/** Distinct reforecast issue times in a window (epoch ms, ascending). */
export async function reforecastIssueTimes(db: Queryable, gaugeId: string, fromMs: number, toMs: number): Promise<number[]> {
  const { rows } = await db.query<{ t: number }>(
    `select distinct (extract(epoch from issue_time) * 1000)::float8 as t from reforecasts
      where gauge_id = $1 and issue_time >= to_timestamp($2) and issue_time < to_timestamp($3) order by 1`,
    [gaugeId, fromMs / 1000, toMs / 1000],
  );
  return rows.map((r) => Number(r.t));
}

/** A version's corrected-member error archive, as the hindcast's stochastic stage uses it. */
export interface ChosenArchive {
  id: string;
  leadMode: 'lead-free' | 'per-lead';
  /** Lead times it can serve: a per-lead archive its lead count, a lead-free one its template length. */
  reach: number;
  summary: z.output<typeof ArchiveSummary>;
  bytes: Uint8Array;
}

/**
 * The archive serving would use for a run of nLeads lead times (the rule of POST /gauges/:id/runs,
 * src/core/stochastic/archive-choice.ts). Also the farthest reach of the two.
 */
export async function correctedArchiveFor(db: Queryable, versionId: string, nLeads: number, minPerLeadRuns?: number): Promise<{ archive: ChosenArchive | null; maxReach: number }> {
  const { rows } = await db.query<{ id: string; lead_mode: 'lead-free' | 'per-lead'; summary: unknown; bytes: Uint8Array }>(
    `select distinct on (lead_mode) id::text as id, lead_mode, summary, bytes from error_archives
      where version_id = $1 and kind = 'corrected' order by lead_mode, id desc`,
    [versionId],
  );
  const all = rows.map((r) => {
    const summary = ArchiveSummary.parse(r.summary);
    return {
      id: r.id,
      leadMode: r.lead_mode,
      reach: Number((r.lead_mode === 'per-lead' ? summary.nLeads : summary.templateLength) ?? 0) || 0,
      summary,
      bytes: new Uint8Array(r.bytes),
    };
  });
  const perLead = all.find((a) => a.leadMode === 'per-lead') ?? null;
  const leadFree = all.find((a) => a.leadMode === 'lead-free') ?? null;
  const archive = chooseArchive(perLead, leadFree, nLeads, minPerLeadRuns);
  return { archive, maxReach: Math.max(0, ...all.map((a) => a.reach)) };
}

const NO_BYTES = new Uint8Array(0);

/** A stored run's verification record (src/core/verification/run-record.ts) with what the verification counts of the run. */
export interface StoredRunRecord {
  id: string;
  issueMs: number;
  source: string;
  status: 'corrected' | 'degraded';
  modelVersionId: string | null;
  /** null when the run has no record yet. */
  record: { format: number; thresholdsKey: string; bytes: Uint8Array } | null;
}

/**
 * Stored runs in issue-time order (then id) with their records, one page at a time; withBytes
 * false reads only whether each has a record (its bytes are then empty).
 */
export async function readRunRecords(db: Queryable, p: RunPage, withBytes = true): Promise<StoredRunRecord[]> {
  const { params, where } = runPageWhere(p, 'r.');
  const { rows } = await db.query<{
    id: string;
    t: number;
    source: string;
    status: 'corrected' | 'degraded';
    model_version_id: string | null;
    format: number | null;
    thresholds_key: string | null;
    bytes: Uint8Array | null;
  }>(
    `select r.id, (extract(epoch from r.issue_time) * 1000)::float8 as t, r.source, r.status, r.model_version_id::text as model_version_id,
            v.format, v.thresholds_key, ${withBytes ? 'v.bytes' : 'null::bytea as bytes'}
       from forecast_runs r left join run_verification_records v on v.run_id = r.id
      where r.gauge_id = $1${where}
      order by r.issue_time, r.id limit $${params.length}`,
    params,
  );
  return rows.map((r) => ({
    id: r.id,
    issueMs: Number(r.t),
    source: r.source,
    status: r.status,
    modelVersionId: r.model_version_id,
    record: r.format === null ? null : { format: Number(r.format), thresholdsKey: r.thresholds_key ?? '', bytes: r.bytes ?? NO_BYTES },
  }));
}

/** Stores (or replaces) runs' verification records. A run deleted meanwhile is skipped. */
export async function upsertRunRecords(db: Queryable, records: { runId: string; format: number; thresholdsKey: string; bytes: Uint8Array }[]): Promise<void> {
  for (let i = 0; i < records.length; i += 100) {
    const chunk = records.slice(i, i + 100);
    const params: unknown[] = [];
    const values = chunk.map((r) => {
      params.push(r.runId, r.format, r.thresholdsKey, Buffer.from(r.bytes.buffer, r.bytes.byteOffset, r.bytes.byteLength));
      const n = params.length;
      return `($${n - 3}, $${n - 2}::integer, $${n - 1}, $${n}::bytea)`;
    });
    await db.query(
      `insert into run_verification_records (run_id, format, thresholds_key, bytes)
       select v.run_id, v.format, v.thresholds_key, v.bytes from (values ${values.join(', ')}) as v(run_id, format, thresholds_key, bytes)
        where exists (select 1 from forecast_runs r where r.id = v.run_id)
       on conflict (run_id) do update set format = excluded.format, thresholds_key = excluded.thresholds_key, bytes = excluded.bytes`,
      params,
    );
  }
}
