import type { Queryable } from './db.ts';
import { issueTimeWindow } from './issue-time-window.ts';

/** One issue's stored output: the numbers laid out as the hindcast result's perIssue describes. */
export interface HindcastIssueRow {
  issueTimeMs: number;
  values: Float64Array;
}

const ROWS_PER_INSERT = 500;

/** Stores a hindcast's per-issue output (the caller's transaction makes it all or nothing). */
export async function insertHindcastIssues(tx: Queryable, jobId: string, rows: HindcastIssueRow[]): Promise<void> {
  for (let i = 0; i < rows.length; i += ROWS_PER_INSERT) {
    const batch = rows.slice(i, i + ROWS_PER_INSERT);
    const params: unknown[] = [jobId];
    const tuples = batch.map((r) => {
      params.push(r.issueTimeMs / 1000, Buffer.from(r.values.buffer, r.values.byteOffset, r.values.byteLength));
      return `($1, to_timestamp($${params.length - 1}), $${params.length})`;
    });
    await tx.query(`insert into hindcast_issues (job_id, issue_time, output) values ${tuples.join(', ')} on conflict (job_id, issue_time) do update set output = excluded.output`, params);
  }
}

/** A hindcast's stored issues in time order, optionally within [fromMs, toMs). */
export async function readHindcastIssues(db: Queryable, jobId: string, fromMs?: number, toMs?: number): Promise<HindcastIssueRow[]> {
  const params: unknown[] = [jobId];
  const where = issueTimeWindow(params, fromMs, toMs);
  const { rows } = await db.query<{ issue_time: Date; output: Uint8Array }>(`select issue_time, output from hindcast_issues where job_id = $1${where} order by issue_time`, params);
  return rows.map((r) => {
    const copy = new Uint8Array(r.output); // aligned for the float view
    return { issueTimeMs: r.issue_time.getTime(), values: new Float64Array(copy.buffer, 0, copy.byteLength / 8) };
  });
}
