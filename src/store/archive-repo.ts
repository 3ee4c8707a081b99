import type { Queryable } from './db.ts';

/** Rows per statement: large enough to be fast, small enough to keep each parameter modest. */
const CHUNK = 20_000;

const seconds = (ms: Float64Array, from: number, to: number) => Array.from(ms.subarray(from, to), (t) => t / 1000);
const nullable = (v: Float64Array, from: number, to: number) =>
  Array.from(v.subarray(from, to), (x) => (Number.isNaN(x) ? null : x));

/** Runs one statement per chunk of rows and adds up the rows each wrote. */
async function inChunks(n: number, write: (from: number, to: number) => Promise<{ rows: { n: number }[] }>): Promise<number> {
  let written = 0;
  for (let from = 0; from < n; from += CHUNK) written += Number((await write(from, Math.min(from + CHUNK, n))).rows[0].n);
  return written;
}

/** A column of an upsert: one value for the whole batch, or one per row (a Postgres array of `type`). */
type UpsertColumn = { column: string; timestamp?: boolean } & ({ value: unknown } | { type: 'float8' | 'int' | 'text'; rows: (from: number, to: number) => unknown[] });

/**
 * The one archive upsert: inserts rows given column by column, and on a natural-key conflict
 * updates the `update` columns only where they differ, so re-sending the same batch changes
 * nothing. Answers how many rows it inserted or changed. `timestamp` columns are epoch seconds.
 */
async function upsertRows(tx: Queryable, table: string, key: string[], update: string[], n: number, columns: UpsertColumn[]): Promise<number> {
  return inChunks(n, (from, to) => {
    const params: unknown[] = [];
    const select: string[] = [];
    const arrays: string[] = [];
    const names: string[] = [];
    for (const c of columns) {
      let expr: string;
      if ('value' in c) {
        params.push(c.value);
        expr = `$${params.length}`;
      } else {
        params.push(c.rows(from, to));
        arrays.push(`$${params.length}::${c.type}[]`);
        expr = `u${names.length}`;
        names.push(expr);
      }
      select.push(c.timestamp ? `to_timestamp(${expr})` : expr);
    }
    return tx.query<{ n: number }>(
      `with w as (
         insert into ${table} (${columns.map((c) => c.column).join(', ')})
         select ${select.join(', ')} from unnest(${arrays.join(', ')}) as u(${names.join(', ')})
         on conflict (${key.join(', ')}) do update set ${update.map((c) => `${c} = excluded.${c}`).join(', ')}
         where ${update.map((c) => `${table}.${c} is distinct from excluded.${c}`).join(' or ')}
         returning 1)
       select count(*)::int as n from w`,
      params,
    );
  });
}

/** Each upsert returns how many rows it inserted or changed; re-sending the same batch changes none. */
export async function upsertObservations(
  tx: Queryable,
  gaugeId: string,
  times: Float64Array,
  values: Float64Array,
  quality: (string | null)[] | null,
): Promise<number> {
  return upsertRows(tx, 'observed_flow', ['gauge_id', 'time'], ['value', 'quality'], times.length, [
    { column: 'gauge_id', value: gaugeId },
    { column: 'time', timestamp: true, type: 'float8', rows: (from, to) => seconds(times, from, to) },
    { column: 'value', type: 'float8', rows: (from, to) => nullable(values, from, to) },
    { column: 'quality', type: 'text', rows: (from, to) => (quality ? quality.slice(from, to) : new Array(to - from).fill(null)) },
  ]);
}

export async function upsertForcing(tx: Queryable, gaugeId: string, variable: string, times: Float64Array, values: Float64Array): Promise<number> {
  return upsertRows(tx, 'forcing_values', ['gauge_id', 'variable', 'time'], ['value'], times.length, [
    { column: 'gauge_id', value: gaugeId },
    { column: 'variable', value: variable },
    { column: 'time', timestamp: true, type: 'float8', rows: (from, to) => seconds(times, from, to) },
    { column: 'value', type: 'float8', rows: (from, to) => nullable(values, from, to) },
  ]);
}

export async function upsertSimulation(tx: Queryable, gaugeId: string, memberId: string, times: Float64Array, values: Float64Array): Promise<number> {
  return upsertRows(tx, 'member_simulations', ['gauge_id', 'member_id', 'time'], ['value'], times.length, [
    { column: 'gauge_id', value: gaugeId },
    { column: 'member_id', value: memberId },
    { column: 'time', timestamp: true, type: 'float8', rows: (from, to) => seconds(times, from, to) },
    { column: 'value', type: 'float8', rows: (from, to) => nullable(values, from, to) },
  ]);
}

/** One member of one past run: values[0] is lead 1 (one step after issue time). */
export async function upsertReforecast(tx: Queryable, gaugeId: string, issueMs: number, memberId: string, values: Float64Array): Promise<number> {
  return upsertRows(tx, 'reforecasts', ['gauge_id', 'issue_time', 'member_id', 'lead'], ['value'], values.length, [
    { column: 'gauge_id', value: gaugeId },
    { column: 'issue_time', timestamp: true, value: issueMs / 1000 },
    { column: 'member_id', value: memberId },
    { column: 'lead', type: 'int', rows: (from, to) => Array.from({ length: to - from }, (_, i) => from + i + 1) },
    { column: 'value', type: 'float8', rows: (from, to) => nullable(values, from, to) },
  ]);
}

/** The forecast forcing one past run was driven by: values[0] is lead 1. */
export async function upsertReforecastForcing(tx: Queryable, gaugeId: string, issueMs: number, variable: string, values: Float64Array): Promise<number> {
  return upsertRows(tx, 'reforecast_forcings', ['gauge_id', 'issue_time', 'variable', 'lead'], ['value'], values.length, [
    { column: 'gauge_id', value: gaugeId },
    { column: 'issue_time', timestamp: true, value: issueMs / 1000 },
    { column: 'variable', value: variable },
    { column: 'lead', type: 'int', rows: (from, to) => Array.from({ length: to - from }, (_, i) => from + i + 1) },
    { column: 'value', type: 'float8', rows: (from, to) => nullable(values, from, to) },
  ]);
}

export async function ensureMembers(tx: Queryable, gaugeId: string, ids: string[]): Promise<void> {
  await tx.query('insert into members (gauge_id, id) select $1, unnest($2::text[]) on conflict do nothing', [gaugeId, ids]);
}

export async function listMembers(db: Queryable, gaugeId: string): Promise<string[]> {
  const { rows } = await db.query<{ id: string }>('select id from members where gauge_id = $1 order by id', [gaugeId]);
  return rows.map((r) => r.id);
}

export async function forcingUnits(db: Queryable, gaugeId: string): Promise<Map<string, string>> {
  const { rows } = await db.query<{ name: string; unit: string }>('select name, unit from forcing_variables where gauge_id = $1', [gaugeId]);
  return new Map(rows.map((r) => [r.name, r.unit]));
}

export async function ensureForcingVariable(tx: Queryable, gaugeId: string, name: string, unit: string): Promise<void> {
  await tx.query('insert into forcing_variables (gauge_id, name, unit) values ($1, $2, $3) on conflict do nothing', [gaugeId, name, unit]);
}

export interface Window {
  fromMs?: number;
  toMs?: number;
}

function windowSql(column: string, w: Window, params: unknown[]): string {
  let sql = '';
  if (w.fromMs !== undefined) {
    params.push(w.fromMs / 1000);
    sql += ` and ${column} >= to_timestamp($${params.length})`;
  }
  if (w.toMs !== undefined) {
    params.push(w.toMs / 1000);
    sql += ` and ${column} < to_timestamp($${params.length})`;
  }
  return sql;
}

const epochMs = (column: string) => `(extract(epoch from ${column}) * 1000)::float8`;

export async function readObservations(db: Queryable, gaugeId: string, w: Window) {
  const params: unknown[] = [gaugeId];
  const where = windowSql('time', w, params);
  const { rows } = await db.query<{ t: number; value: number | null; quality: string | null }>(
    `select ${epochMs('time')} as t, value, quality from observed_flow where gauge_id = $1${where} order by time`,
    params,
  );
  return rows;
}

export async function readForcings(db: Queryable, gaugeId: string, w: Window, variables?: string[]) {
  const params: unknown[] = [gaugeId];
  let where = windowSql('time', w, params);
  if (variables) {
    params.push(variables);
    where += ` and variable = any($${params.length}::text[])`;
  }
  const { rows } = await db.query<{ variable: string; t: number; value: number | null }>(
    `select variable, ${epochMs('time')} as t, value from forcing_values where gauge_id = $1${where} order by variable, time`,
    params,
  );
  return rows;
}

export async function readSimulations(db: Queryable, gaugeId: string, w: Window, members?: string[]) {
  const params: unknown[] = [gaugeId];
  let where = windowSql('time', w, params);
  if (members) {
    params.push(members);
    where += ` and member_id = any($${params.length}::text[])`;
  }
  const { rows } = await db.query<{ member_id: string; t: number; value: number | null }>(
    `select member_id, ${epochMs('time')} as t, value from member_simulations where gauge_id = $1${where} order by member_id, time`,
    params,
  );
  return rows;
}

export async function readReforecasts(db: Queryable, gaugeId: string, w: Window) {
  const params: unknown[] = [gaugeId];
  const where = windowSql('issue_time', w, params);
  const { rows } = await db.query<{ t: number; member_id: string; lead: number; value: number | null }>(
    `select ${epochMs('issue_time')} as t, member_id, lead, value from reforecasts where gauge_id = $1${where}
     order by issue_time, member_id, lead`,
    params,
  );
  return rows;
}

export async function readReforecastForcings(db: Queryable, gaugeId: string, w: Window) {
  const params: unknown[] = [gaugeId];
  const where = windowSql('issue_time', w, params);
  const { rows } = await db.query<{ t: number; variable: string; lead: number; value: number | null }>(
    `select ${epochMs('issue_time')} as t, variable, lead, value from reforecast_forcings where gauge_id = $1${where}
     order by issue_time, variable, lead`,
    params,
  );
  return rows;
}
