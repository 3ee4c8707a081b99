import type { Queryable } from './db.ts';

/** Rows per statement on the batched-insert path: large enough to be fast, small enough to keep each parameter modest. */
const CHUNK = 20_000;

/** From this many rows on, the PostgreSQL server gets the batch by COPY; smaller batches keep batched inserts. */
export const COPY_MIN_ROWS = 2_000;

/** Characters of COPY text per write: big enough to be cheap, small enough that no write holds the event loop. */
const COPY_TEXT_CHUNK = 1 << 20;

/**
 * A table's rows in groups: every row of a group shares the `labels` (e.g. a member id, or an issue
 * time and a member id), then an axis value (a time, or a lead 1, 2, …), a value (NaN = missing),
 * and optionally one text column (observation quality).
 */
interface ArchiveTable {
  table: string;
  /** Label columns, then the axis column, the value column, and the optional text column. */
  labels: { column: string; timestamp?: boolean }[];
  axis: { column: string; timestamp: boolean };
  text?: string;
  /** The natural key (after gauge_id); on conflict `value` (and `text`) are updated where they differ. */
  key: string[];
}

interface RowGroup {
  /** One per label column; timestamps as epoch milliseconds. */
  labels: (string | number)[];
  /** Axis values: epoch milliseconds for a time axis; null for leads 1..values.length. */
  axisMs: Float64Array | null;
  values: Float64Array;
  text?: (string | null)[] | null;
  /** Leads start at leadOffset + 1 (a part of a longer run cut by chunkGroups). */
  leadOffset?: number;
}

/** ISO 8601 UTC text as PostgreSQL reads a timestamptz; one Date per distinct time in a batch. */
function timestampText(ms: number, cache: Map<number, string>): string {
  let s = cache.get(ms);
  if (s === undefined) cache.set(ms, (s = new Date(ms).toISOString()));
  return s;
}

/** COPY text format: backslash, tab, newline and carriage return are escaped; null is \N. */
function copyEscape(s: string | null): string {
  if (s === null) return '\\N';
  return /[\\\t\n\r]/.test(s) ? s.replace(/[\\\t\n\r]/g, (c) => (c === '\\' ? '\\\\' : c === '\t' ? '\\t' : c === '\n' ? '\\n' : '\\r')) : s;
}

/** The batch as COPY text lines (gauge_id, labels…, axis, value[, text]), yielded about COPY_TEXT_CHUNK characters at a time. */
function* copyLines(spec: ArchiveTable, gaugeId: string, groups: RowGroup[]): Generator<string> {
  const times = new Map<number, string>();
  const gauge = copyEscape(gaugeId);
  let out = '';
  for (const g of groups) {
    const prefix = [gauge, ...g.labels.map((l, k) => (spec.labels[k].timestamp ? timestampText(l as number, times) : copyEscape(String(l))))].join('\t') + '\t';
    const n = g.values.length;
    for (let i = 0; i < n; i++) {
      const axis = g.axisMs ? timestampText(g.axisMs[i], times) : String((g.leadOffset ?? 0) + i + 1);
      const v = g.values[i];
      out += prefix + axis + (Number.isNaN(v) ? '\t\\N' : '\t' + v);
      if (spec.text) out += '\t' + copyEscape(g.text ? g.text[i] : null);
      out += '\n';
      if (out.length >= COPY_TEXT_CHUNK) {
        yield out;
        out = '';
      }
    }
  }
  if (out) yield out;
}

const rowCount = (groups: RowGroup[]) => groups.reduce((n, g) => n + g.values.length, 0);

/**
 * The one archive upsert: inserts the groups' rows, and on a natural-key conflict updates the value
 * (and text) only where it differs, so re-sending the same batch changes nothing. Answers how many
 * rows it inserted or changed. All of it happens in the caller's transaction: a failure anywhere
 * rolls back the whole batch.
 */
async function upsertGroups(tx: Queryable, spec: ArchiveTable, gaugeId: string, groups: RowGroup[]): Promise<number> {
  const n = rowCount(groups);
  if (n === 0) return 0;
  if (tx.copyFrom && n >= COPY_MIN_ROWS) return copyGroups(tx as Required<Queryable>, spec, gaugeId, groups, n);
  let written = 0;
  for (const part of chunkGroups(groups, CHUNK)) written += await insertGroups(tx, spec, gaugeId, part);
  return written;
}

const valueColumns = (spec: ArchiveTable) => ['value', ...(spec.text ? [spec.text] : [])];
const allColumns = (spec: ArchiveTable) => ['gauge_id', ...spec.labels.map((l) => l.column), spec.axis.column, ...valueColumns(spec)];

function onConflict(spec: ArchiveTable): string {
  const update = valueColumns(spec);
  return `on conflict (gauge_id, ${spec.key.join(', ')}) do update set ${update.map((c) => `${c} = excluded.${c}`).join(', ')}
          where ${update.map((c) => `${spec.table}.${c} is distinct from excluded.${c}`).join(' or ')}`;
}

/**
 * COPY path (PostgreSQL server). A batch whose key range holds no stored rows yet (the usual bulk
 * load) is copied straight into the table (the ingest routes lock the gauge, so no other write of
 * its archive comes between the check and the copy; if one did, the key would refuse it); otherwise it is copied into a session-local staging table
 * and merged with one INSERT … SELECT … ON CONFLICT DO UPDATE. Either way a row the table refuses
 * (a key repeated, a missing member) fails the statement and the transaction with it.
 */
async function copyGroups(tx: Required<Queryable>, spec: ArchiveTable, gaugeId: string, groups: RowGroup[], n: number): Promise<number> {
  const columns = allColumns(spec).join(', ');
  if (!(await anyStored(tx, spec, gaugeId, groups))) {
    await tx.copyFrom(`copy ${spec.table} (${columns}) from stdin`, copyLines(spec, gaugeId, groups));
    return n;
  }
  const stage = `stage_${spec.table}`;
  // One staging table per connection and table, emptied at every commit: no catalog churn per batch.
  await tx.query(`create temp table if not exists ${stage} (like ${spec.table}) on commit delete rows`);
  await tx.query(`truncate ${stage}`);
  await tx.copyFrom(`copy ${stage} (${columns}) from stdin`, copyLines(spec, gaugeId, groups));
  const { rows } = await tx.query<{ n: number }>(
    `with w as (insert into ${spec.table} (${columns}) select ${columns} from ${stage} ${onConflict(spec)} returning 1)
     select count(*)::int as n from w`,
  );
  return Number(rows[0].n);
}

/** Whether any stored row shares a label and lies in the batch's axis range (a cheap, conservative overlap test on the key index). */
async function anyStored(tx: Queryable, spec: ArchiveTable, gaugeId: string, groups: RowGroup[]): Promise<boolean> {
  const params: unknown[] = [gaugeId];
  let where = 'gauge_id = $1';
  spec.labels.forEach((l, k) => {
    const distinct = [...new Set(groups.map((g) => g.labels[k]))];
    params.push(l.timestamp ? distinct.map((ms) => new Date(ms as number).toISOString()) : distinct.map(String));
    where += ` and ${l.column} = any($${params.length}::${l.timestamp ? 'timestamptz' : 'text'}[])`;
  });
  let lo = Infinity;
  let hi = -Infinity;
  for (const g of groups) {
    const len = g.values.length;
    if (!len) continue;
    const first = g.axisMs ? g.axisMs[0] : 1;
    const last = g.axisMs ? g.axisMs[len - 1] : len;
    lo = Math.min(lo, first, last);
    hi = Math.max(hi, first, last);
  }
  if (spec.axis.timestamp) {
    params.push(new Date(lo).toISOString(), new Date(hi).toISOString());
    where += ` and ${spec.axis.column} between $${params.length - 1}::timestamptz and $${params.length}::timestamptz`;
  } else {
    params.push(lo, hi);
    where += ` and ${spec.axis.column} between $${params.length - 1}::int and $${params.length}::int`;
  }
  const { rows } = await tx.query(`select 1 from ${spec.table} where ${where} limit 1`, params);
  return rows.length > 0;
}

/** Splits groups into parts of at most `size` rows (a long group is cut, keeping its labels and axis positions). */
function* chunkGroups(groups: RowGroup[], size: number): Generator<RowGroup[]> {
  let part: RowGroup[] = [];
  let rows = 0;
  for (const g of groups) {
    for (let from = 0; from < g.values.length; ) {
      const to = Math.min(g.values.length, from + size - rows);
      part.push({
        labels: g.labels,
        axisMs: g.axisMs ? g.axisMs.subarray(from, to) : null,
        values: g.values.subarray(from, to),
        text: g.text ? g.text.slice(from, to) : g.text,
        leadOffset: (g.leadOffset ?? 0) + from,
      });
      rows += to - from;
      from = to;
      if (rows >= size) {
        yield part;
        part = [];
        rows = 0;
      }
    }
  }
  if (part.length) yield part;
}

/** Batched-insert path (embedded store, small batches): one INSERT … SELECT FROM unnest(…) per part. */
async function insertGroups(tx: Queryable, spec: ArchiveTable, gaugeId: string, groups: RowGroup[]): Promise<number> {
  const labels = spec.labels.map(() => [] as unknown[]);
  const axis: number[] = [];
  const values: (number | null)[] = [];
  const text: (string | null)[] = [];
  for (const g of groups) {
    const offset = g.leadOffset ?? 0;
    for (let i = 0; i < g.values.length; i++) {
      g.labels.forEach((l, k) => labels[k].push(spec.labels[k].timestamp ? (l as number) / 1000 : l));
      axis.push(g.axisMs ? g.axisMs[i] / 1000 : offset + i + 1);
      const v = g.values[i];
      values.push(Number.isNaN(v) ? null : v);
      if (spec.text) text.push(g.text ? g.text[i] : null);
    }
  }
  const params: unknown[] = [gaugeId];
  const arrays: string[] = [];
  const select: string[] = ['$1'];
  const add = (array: unknown[], type: string, timestamp: boolean) => {
    params.push(array);
    arrays.push(`$${params.length}::${type}[]`);
    const name = `u${arrays.length}`;
    select.push(timestamp ? `to_timestamp(${name})` : name);
  };
  spec.labels.forEach((l, k) => add(labels[k], l.timestamp ? 'float8' : 'text', !!l.timestamp));
  add(axis, spec.axis.timestamp ? 'float8' : 'int', spec.axis.timestamp);
  add(values, 'float8', false);
  if (spec.text) add(text, 'text', false);
  const names = arrays.map((_, i) => `u${i + 1}`);
  const { rows } = await tx.query<{ n: number }>(
    `with w as (
       insert into ${spec.table} (${allColumns(spec).join(', ')})
       select ${select.join(', ')} from unnest(${arrays.join(', ')}) as u(${names.join(', ')})
       ${onConflict(spec)}
       returning 1)
     select count(*)::int as n from w`,
    params,
  );
  return Number(rows[0].n);
}

const OBSERVATIONS: ArchiveTable = { table: 'observed_flow', labels: [], axis: { column: 'time', timestamp: true }, text: 'quality', key: ['time'] };
const FORCINGS: ArchiveTable = { table: 'forcing_values', labels: [{ column: 'variable' }], axis: { column: 'time', timestamp: true }, key: ['variable', 'time'] };
const SIMULATIONS: ArchiveTable = { table: 'member_simulations', labels: [{ column: 'member_id' }], axis: { column: 'time', timestamp: true }, key: ['member_id', 'time'] };
const REFORECASTS: ArchiveTable = {
  table: 'reforecasts',
  labels: [{ column: 'issue_time', timestamp: true }, { column: 'member_id' }],
  axis: { column: 'lead', timestamp: false },
  key: ['issue_time', 'member_id', 'lead'],
};
const REFORECAST_FORCINGS: ArchiveTable = {
  table: 'reforecast_forcings',
  labels: [{ column: 'issue_time', timestamp: true }, { column: 'variable' }],
  axis: { column: 'lead', timestamp: false },
  key: ['issue_time', 'variable', 'lead'],
};

/** Each upsert returns how many rows it inserted or changed; re-sending the same batch changes none. */
export async function upsertObservations(
  tx: Queryable,
  gaugeId: string,
  times: Float64Array,
  values: Float64Array,
  quality: (string | null)[] | null,
): Promise<number> {
  return upsertGroups(tx, OBSERVATIONS, gaugeId, [{ labels: [], axisMs: times, values, text: quality }]);
}

/** Several forcing variables on one time axis. */
export async function upsertForcings(tx: Queryable, gaugeId: string, times: Float64Array, variables: { name: string; values: Float64Array }[]): Promise<number> {
  return upsertGroups(tx, FORCINGS, gaugeId, variables.map((v) => ({ labels: [v.name], axisMs: times, values: v.values })));
}

export async function upsertForcing(tx: Queryable, gaugeId: string, variable: string, times: Float64Array, values: Float64Array): Promise<number> {
  return upsertForcings(tx, gaugeId, times, [{ name: variable, values }]);
}

/** Several members' simulations on one time axis. */
export async function upsertSimulations(tx: Queryable, gaugeId: string, times: Float64Array, members: { id: string; values: Float64Array }[]): Promise<number> {
  return upsertGroups(tx, SIMULATIONS, gaugeId, members.map((m) => ({ labels: [m.id], axisMs: times, values: m.values })));
}

export async function upsertSimulation(tx: Queryable, gaugeId: string, memberId: string, times: Float64Array, values: Float64Array): Promise<number> {
  return upsertSimulations(tx, gaugeId, times, [{ id: memberId, values }]);
}

/** Past runs, member by member: values[0] is lead 1 (one step after issue time). */
export async function upsertReforecasts(tx: Queryable, gaugeId: string, members: { issueMs: number; memberId: string; values: Float64Array }[]): Promise<number> {
  return upsertGroups(tx, REFORECASTS, gaugeId, members.map((m) => ({ labels: [m.issueMs, m.memberId], axisMs: null, values: m.values })));
}

/** One member of one past run: values[0] is lead 1 (one step after issue time). */
export async function upsertReforecast(tx: Queryable, gaugeId: string, issueMs: number, memberId: string, values: Float64Array): Promise<number> {
  return upsertReforecasts(tx, gaugeId, [{ issueMs, memberId, values }]);
}

/** The forecast forcings past runs were driven by: values[0] is lead 1. */
export async function upsertReforecastForcings(tx: Queryable, gaugeId: string, series: { issueMs: number; variable: string; values: Float64Array }[]): Promise<number> {
  return upsertGroups(tx, REFORECAST_FORCINGS, gaugeId, series.map((f) => ({ labels: [f.issueMs, f.variable], axisMs: null, values: f.values })));
}

export async function upsertReforecastForcing(tx: Queryable, gaugeId: string, issueMs: number, variable: string, values: Float64Array): Promise<number> {
  return upsertReforecastForcings(tx, gaugeId, [{ issueMs, variable, values }]);
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
  const where = windowSql('time', w, params);
  if (variables) {
    params.push(variables);
    const { rows } = await db.query<{ variable: string; t: number; value: number | null }>(
      `select s.variable, ${epochMs('s.time')} as t, s.value from ${eachOf(params.length)}
       cross join lateral (select variable, time, value from forcing_values where gauge_id = $1 and variable = one.name${where} offset 0) s order by s.variable, s.time`,
      params,
    );
    return rows;
  }
  const { rows } = await db.query<{ variable: string; t: number; value: number | null }>(
    `select variable, ${epochMs('time')} as t, value from forcing_values where gauge_id = $1${where} order by variable, time`,
    params,
  );
  return rows;
}

/**
 * The distinct names of the text array parameter $n as rows one(name). Joined laterally to a
 * subquery kept apart by `offset 0`, each name gets its own index range scan on (gauge, name, time):
 * written as `name = any($n)` the planner, without fresh statistics (after a bulk load, with
 * autovacuum off or not yet run), filtered the whole gauge's index range instead — 20–40 ms for a
 * run's 51 members × 12 steps, against under a millisecond.
 */
const eachOf = (n: number) => `(select distinct unnest($${n}::text[]) as name) one`;

export async function readSimulations(db: Queryable, gaugeId: string, w: Window, members?: string[]) {
  const params: unknown[] = [gaugeId];
  const where = windowSql('time', w, params);
  if (members) {
    params.push(members);
    const { rows } = await db.query<{ member_id: string; t: number; value: number | null }>(
      `select s.member_id, ${epochMs('s.time')} as t, s.value from ${eachOf(params.length)}
       cross join lateral (select member_id, time, value from member_simulations where gauge_id = $1 and member_id = one.name${where} offset 0) s order by s.member_id, s.time`,
      params,
    );
    return rows;
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

/** Rows per page of a paged archive read: small enough that no page holds the event loop long. */
export const archivePaging = { rows: 1_000 };

type KeyPart = { expr: string; type: 'timestamptz' | 'text' | 'int' };

/**
 * Keyset pagination: runs `sql(after)` (which must order by the key) page by page, each page
 * starting after the last row of the one before, so every page is an index range scan.
 */
async function* keysetPages<R>(q: Queryable, sql: (after: string) => string, params: unknown[], key: KeyPart[], keyOf: (row: R) => unknown[]): AsyncGenerator<R[]> {
  let last: unknown[] | null = null;
  const limit = archivePaging.rows;
  for (;;) {
    const p = [...params];
    let after = '';
    if (last) {
      const slots = key.map((k, i) => {
        p.push(k.type === 'timestamptz' ? new Date(last![i] as number).toISOString() : last![i]);
        return `$${p.length}::${k.type}`;
      });
      after = ` and (${key.map((k) => k.expr).join(', ')}) > (${slots.join(', ')})`;
    }
    const { rows } = await q.query<R>(`${sql(after)} limit ${limit}`, p);
    if (rows.length) yield rows;
    if (rows.length < limit) return;
    last = keyOf(rows[rows.length - 1]);
  }
}

/** Observations in a window, in pages ordered by time. */
export function pageObservations(q: Queryable, gaugeId: string, w: Window) {
  const params: unknown[] = [gaugeId];
  const where = windowSql('time', w, params);
  return keysetPages<{ t: number; value: number | null; quality: string | null }>(
    q,
    (after) => `select ${epochMs('time')} as t, value, quality from observed_flow where gauge_id = $1${where}${after} order by time`,
    params,
    [{ expr: 'time', type: 'timestamptz' }],
    (r) => [r.t],
  );
}

/** One forcing variable in a window, in pages ordered by time. */
export function pageForcing(q: Queryable, gaugeId: string, w: Window, variable: string) {
  const params: unknown[] = [gaugeId, variable];
  const where = windowSql('time', w, params);
  return keysetPages<{ t: number; value: number | null }>(
    q,
    (after) => `select ${epochMs('time')} as t, value from forcing_values where gauge_id = $1 and variable = $2${where}${after} order by time`,
    params,
    [{ expr: 'time', type: 'timestamptz' }],
    (r) => [r.t],
  );
}

/** Member simulations in a window, in pages ordered by member and time. */
export function pageSimulations(q: Queryable, gaugeId: string, w: Window, members?: string[]) {
  const params: unknown[] = [gaugeId];
  let where = windowSql('time', w, params);
  if (members) {
    params.push(members);
    where += ` and member_id = any($${params.length}::text[])`;
  }
  return keysetPages<{ member_id: string; t: number; value: number | null }>(
    q,
    (after) => `select member_id, ${epochMs('time')} as t, value from member_simulations where gauge_id = $1${where}${after} order by member_id, time`,
    params,
    [{ expr: 'member_id', type: 'text' }, { expr: 'time', type: 'timestamptz' }],
    (r) => [r.member_id, r.t],
  );
}

/** Past runs issued in a window, in pages ordered by issue time, member and lead. */
export function pageReforecasts(q: Queryable, gaugeId: string, w: Window) {
  const params: unknown[] = [gaugeId];
  const where = windowSql('issue_time', w, params);
  return keysetPages<{ t: number; member_id: string; lead: number; value: number | null }>(
    q,
    (after) => `select ${epochMs('issue_time')} as t, member_id, lead, value from reforecasts where gauge_id = $1${where}${after} order by issue_time, member_id, lead`,
    params,
    [{ expr: 'issue_time', type: 'timestamptz' }, { expr: 'member_id', type: 'text' }, { expr: 'lead', type: 'int' }],
    (r) => [r.t, r.member_id, r.lead],
  );
}
