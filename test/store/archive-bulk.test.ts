import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import {
  COPY_MIN_ROWS,
  ensureForcingVariable,
  ensureMembers,
  readForcings,
  readObservations,
  readReforecasts,
  readSimulations,
  upsertForcings,
  upsertObservations,
  upsertReforecasts,
  upsertSimulations,
} from '../../src/store/archive-repo.ts';
import { openTestDb, type TestDb } from '../helpers/test-db.ts';

// Bulk writes: on a PostgreSQL server batches of COPY_MIN_ROWS rows or more go by COPY (straight
// into the table, or through a staging table when stored rows overlap), smaller ones and the
// embedded store by batched inserts. Both must store the same rows and keep a failed batch out.

let t: TestDb;
const gauge = 'bulk-gauge';
const day = 86_400_000;
const t0 = Date.parse('2000-01-01T00:00:00Z');
const n = Math.max(COPY_MIN_ROWS, 3_000);
const times = Float64Array.from({ length: n }, (_, i) => t0 + i * day);
const series = (m: number) => Float64Array.from({ length: n }, (_, i) => (i % 97 === 5 ? NaN : Math.round((m + 1) * 1000 * Math.abs(Math.sin(i / 13))) / 1000 + 1e-7));

beforeAll(async () => {
  t = await openTestDb();
  await t.db.query(`insert into gauges (id, name, catchment_area_km2, time_step, step_seconds, time_zone, flow_unit) values ($1, 'Bulk', 10, 'P1D', 86400, 'UTC', 'm3/s')`, [gauge]);
  await t.db.transaction((tx) => ensureMembers(tx, gauge, ['a', 'b']));
});
afterAll(async () => t?.close());

const count = async (table: string) => Number((await t.db.query<{ n: number }>(`select count(*)::int as n from ${table} where gauge_id = $1`, [gauge])).rows[0].n);

describe('bulk archive writes', () => {
  it('a large simulation batch is stored exactly (missing values stay null), and re-sending it changes nothing', async () => {
    const members = [{ id: 'a', values: series(0) }, { id: 'b', values: series(1) }];
    expect(await t.db.transaction((tx) => upsertSimulations(tx, gauge, times, members))).toBe(2 * n);
    const rows = await readSimulations(t.db, gauge, {});
    expect(rows.length).toBe(2 * n);
    for (const [k, m] of members.entries()) {
      for (let i = 0; i < n; i++) {
        const r = rows[k * n + i];
        expect(r.member_id).toBe(m.id);
        expect(r.t).toBe(times[i]);
        expect(r.value).toBe(Number.isNaN(m.values[i]) ? null : m.values[i]);
      }
    }
    expect(await t.db.transaction((tx) => upsertSimulations(tx, gauge, times, members))).toBe(0);
  });

  it('an overlapping batch updates only the rows that changed and inserts the new ones', async () => {
    // Shifted by 100 days: 100 new rows at the end, and 3 changed values among the overlapping ones.
    const shifted = Float64Array.from(times, (x) => x + 100 * day);
    const before = series(0);
    const values = Float64Array.from({ length: n }, (_, i) => (i + 100 < n ? before[i + 100] : 42));
    values[10] = 1;
    values[20] = 2;
    values[30] = NaN;
    const same = (x: number, y: number) => x === y || (Number.isNaN(x) && Number.isNaN(y));
    const changed = [10, 20, 30].filter((i) => !same(values[i], before[i + 100])).length;
    const written = await t.db.transaction((tx) => upsertSimulations(tx, gauge, shifted, [{ id: 'a', values }]));
    expect(written).toBe(100 + changed);
    const rows = (await readSimulations(t.db, gauge, { fromMs: shifted[0] }, ['a'])).map((r) => r.value);
    expect(rows.length).toBe(n);
    expect(rows[10]).toBe(1);
    expect(rows[20]).toBe(2);
    expect(rows[30]).toBe(null);
    expect(rows[n - 1]).toBe(42);
  });

  it('a bad row in a large batch writes nothing, not even what the same transaction wrote before it', async () => {
    const obsBefore = await count('observed_flow');
    const simsBefore = await count('member_simulations');
    const quality = Array.from({ length: n }, (_, i) => (i === 7 ? 'odd\ttext, with \\ and\nnewline' : i % 2 ? 'good' : null));
    // The second upsert names a member the gauge does not have: its foreign key refuses the row.
    await expect(
      t.db.transaction(async (tx) => {
        await upsertObservations(tx, gauge, times, series(3), quality);
        await upsertSimulations(tx, gauge, times.map((x) => x + 20_000 * day), [{ id: 'a', values: series(2) }, { id: 'not-a-member', values: series(2) }]);
      }),
    ).rejects.toThrow();
    expect(await count('observed_flow')).toBe(obsBefore);
    expect(await count('member_simulations')).toBe(simsBefore);
  });

  it('observation quality text survives a large batch, tabs, backslashes and newlines included', async () => {
    const quality = Array.from({ length: n }, (_, i) => (i === 7 ? 'odd\ttext, with \\N and\r\nnewline' : i % 2 ? 'good' : null));
    const values = series(4);
    expect(await t.db.transaction((tx) => upsertObservations(tx, gauge, times, values, quality))).toBe(n);
    const rows = await readObservations(t.db, gauge, {});
    expect(rows.map((r) => r.quality)).toEqual(quality);
    expect(rows.map((r) => r.value)).toEqual(Array.from(values, (v) => (Number.isNaN(v) ? null : v)));
  });

  it('a read for named members (or forcings) returns exactly their rows in the window, by name then time, each name once', async () => {
    const from = t0 + 40 * day;
    const to = t0 + 52 * day;
    const all = await readSimulations(t.db, gauge, { fromMs: from, toMs: to });
    // Names in any order, repeated, and one the gauge does not have.
    const named = await readSimulations(t.db, gauge, { fromMs: from, toMs: to }, ['b', 'a', 'b', 'nobody']);
    expect(named.length).toBe(24);
    expect(named).toEqual(all);
    expect(await readSimulations(t.db, gauge, { fromMs: from, toMs: to }, ['b'])).toEqual(all.filter((r) => r.member_id === 'b'));
    expect(await readSimulations(t.db, gauge, { fromMs: from, toMs: to }, [])).toEqual([]);
    await t.db.transaction(async (tx) => {
      await ensureForcingVariable(tx, gauge, 'precipitation', 'mm');
      await ensureForcingVariable(tx, gauge, 'snow', 'mm');
      await upsertForcings(tx, gauge, times.subarray(0, 100), [{ name: 'snow', values: series(5).subarray(0, 100) }, { name: 'precipitation', values: series(6).subarray(0, 100) }]);
    });
    const forcings = await readForcings(t.db, gauge, { fromMs: from, toMs: to });
    expect(forcings.length).toBe(24);
    expect(await readForcings(t.db, gauge, { fromMs: from, toMs: to }, ['snow', 'precipitation', 'snow'])).toEqual(forcings);
    expect(await readForcings(t.db, gauge, { fromMs: from, toMs: to }, ['snow'])).toEqual(forcings.filter((r) => r.variable === 'snow'));
  });

  it('past runs longer than one insert chunk keep their lead numbers', async () => {
    await t.db.transaction((tx) => ensureForcingVariable(tx, gauge, 'precipitation', 'mm'));
    const long = Float64Array.from({ length: 25_000 }, (_, i) => i / 10);
    const runs = [
      { issueMs: t0, memberId: 'a', values: long },
      { issueMs: t0, memberId: 'b', values: long.subarray(0, 3) },
      { issueMs: t0 + day, memberId: 'a', values: long.subarray(0, 5) },
    ];
    expect(await t.db.transaction((tx) => upsertReforecasts(tx, gauge, runs))).toBe(25_008);
    const rows = await readReforecasts(t.db, gauge, {});
    expect(rows.length).toBe(25_008);
    const first = rows.filter((r) => r.t === t0 && r.member_id === 'a');
    expect(first.map((r) => r.lead)).toEqual(Array.from({ length: 25_000 }, (_, i) => i + 1));
    expect(first.map((r) => r.value)).toEqual(Array.from(long));
    expect(await t.db.transaction((tx) => upsertReforecasts(tx, gauge, runs))).toBe(0);
  });
});
